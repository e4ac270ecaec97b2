"""python -m log_prob_scoring.run"""
import torch
import torch.nn.functional as F

from .net import MCBearingClassifier
from .scoring import brier, heldout_nll, heldout_nll_lme


def main():
    g = torch.Generator().manual_seed(2)
    centres = torch.randn(5, 32, generator=g)
    y = torch.randint(0, 5, (4_000,), generator=g)
    x = centres[y] + torch.randn(4_000, 32, generator=g)
    model = MCBearingClassifier()
    opt = torch.optim.Adam(model.parameters(), lr=3e-3)
    for _ in range(300):
        loss = F.cross_entropy(model(x[:3_000]), y[:3_000])
        opt.zero_grad()
        loss.backward()
        opt.step()
    xt, yt = x[3_000:], y[3_000:]
    print("nll (mean log p)", heldout_nll(model, xt, yt))
    print("nll (log-mean-exp)", heldout_nll_lme(model, xt, yt))
    print("brier", brier(model, xt, yt))


if __name__ == "__main__":
    main()
