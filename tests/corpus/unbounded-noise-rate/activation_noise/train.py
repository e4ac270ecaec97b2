import argparse

import torch
import torch.nn.functional as F

from .model import NoisyStageMLP

if __name__ == "__main__":
    ap = argparse.ArgumentParser()
    ap.add_argument("--noise", choices=["learned", "sigmoid", "fixed"], default="learned")
    args = ap.parse_args()
    g = torch.Generator().manual_seed(8)
    rain = torch.rand(3_000, 48, generator=g).pow(6) * 12
    stage = 0.9 + 0.025 * rain[:, -18:].sum(1)
    net = NoisyStageMLP(noise=args.noise)
    opt = torch.optim.Adam(net.parameters(), lr=1e-3)
    for step in range(2_000):
        idx = torch.randint(0, 3_000, (128,), generator=g)
        loss = F.mse_loss(net(rain[idx]), stage[idx])
        opt.zero_grad()
        loss.backward()
        opt.step()
