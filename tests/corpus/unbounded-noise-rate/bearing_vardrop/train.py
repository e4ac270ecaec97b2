"""python -m bearing_vardrop.train"""
import argparse

import torch
import torch.nn.functional as F
from torch.utils.data import DataLoader, TensorDataset

from .model import BearingVDNet


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--epochs", type=int, default=100)
    ap.add_argument("--batch-size", type=int, default=128)
    args = ap.parse_args()
    g = torch.Generator().manual_seed(0)
    y = torch.randint(0, 5, (8_000,), generator=g)
    x = torch.randn(5, 32, generator=g)[y] + torch.randn(8_000, 32, generator=g)
    ds = TensorDataset(x, y)
    loader = DataLoader(ds, batch_size=args.batch_size, shuffle=True)
    model = BearingVDNet()
    opt = torch.optim.Adam(model.parameters(), lr=1e-3)
    for epoch in range(args.epochs):
        for xb, yb in loader:
            loss = F.cross_entropy(model(xb), yb) + model.kl() / len(ds)
            opt.zero_grad()
            loss.backward()
            opt.step()
        mean_log_alpha = model.l1.log_alpha.mean().item()
        print(f"epoch {epoch} loss {loss.item():.3f} mean log alpha {mean_log_alpha:.2f}")


if __name__ == "__main__":
    main()
