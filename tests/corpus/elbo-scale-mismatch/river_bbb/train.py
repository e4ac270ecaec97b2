"""Train the Bayesian river-stage net.

    python -m river_bbb.train --epochs 40 --batch-size 128
"""
import argparse

import torch
import torch.nn.functional as F

from .data import make_loaders
from .model import RiverStageNet


def parse_args():
    p = argparse.ArgumentParser()
    p.add_argument("--epochs", type=int, default=40)
    p.add_argument("--batch-size", type=int, default=128)
    p.add_argument("--lr", type=float, default=1e-3)
    p.add_argument("--out", default="checkpoints/river_bbb.pt")
    return p.parse_args()


def main():
    args = parse_args()
    train_loader, val_loader = make_loaders(batch_size=args.batch_size)
    model = RiverStageNet()
    opt = torch.optim.Adam(model.parameters(), lr=args.lr)

    for epoch in range(args.epochs):
        model.train()
        running = 0.0
        for rain, stage in train_loader:
            opt.zero_grad()
            pred = model(rain)
            nll = F.mse_loss(pred, stage)
            loss = nll + model.kl()
            loss.backward()
            opt.step()
            running += loss.item()
        with torch.no_grad():
            val_rmse = torch.cat([(model(x) - y) ** 2 for x, y in val_loader]).mean().sqrt()
        print(f"epoch {epoch:3d}  loss {running / len(train_loader):.3f}  val rmse {val_rmse:.3f}")

    torch.save(model.state_dict(), args.out)


if __name__ == "__main__":
    main()
