"""Minibatch variational training of the river-stage forecaster.

Usage: python -m riverlab.train_stage --epochs 40
"""
import argparse
from pathlib import Path

import torch
from torch.distributions import Normal
from torch.utils.data import DataLoader, TensorDataset, random_split

from .data import load_stage_records
from .models import RiverStageForecaster

CONFIG = {
    "window_hours": 24,
    "hidden": 64,
    "n_stations": 6,
    "prior_std": 1.0,
    "batch_size": 64,
    "epochs": 40,
    "lr": 3e-3,
    "val_fraction": 0.1,
    "seed": 7,
}


def make_loaders(cfg):
    rain, stage = load_stage_records(window_hours=cfg["window_hours"], n_stations=cfg["n_stations"])
    full = TensorDataset(rain, stage)
    n_val = int(len(full) * cfg["val_fraction"])
    generator = torch.Generator().manual_seed(cfg["seed"])
    train_set, val_set = random_split(full, [len(full) - n_val, n_val], generator=generator)
    train_loader = DataLoader(train_set, batch_size=cfg["batch_size"], shuffle=True)
    val_loader = DataLoader(val_set, batch_size=512)
    return train_loader, val_loader


@torch.no_grad()
def validation_elbo(model, loader):
    """Full-data ELBO on the validation split (monitoring only, never optimised)."""
    nll = sum(-Normal(model(xb), model.obs_std()).log_prob(yb).sum() for xb, yb in loader)
    return -(nll + model.kl()).item()


def train(cfg=CONFIG):
    torch.manual_seed(cfg["seed"])
    train_loader, val_loader = make_loaders(cfg)
    n_gauge_records = len(train_loader.dataset)
    model = RiverStageForecaster(cfg["window_hours"], cfg["hidden"], cfg["n_stations"], cfg["prior_std"])
    optimizer = torch.optim.Adam(model.parameters(), lr=cfg["lr"])

    for epoch in range(cfg["epochs"]):
        model.train()
        running = 0.0
        for xb, yb in train_loader:
            pred = model(xb)
            nll = -Normal(pred, model.obs_std()).log_prob(yb).sum(-1).mean()
            loss = nll + model.kl() / xb.shape[0]
            optimizer.zero_grad()
            loss.backward()
            optimizer.step()
            running += loss.item()
        val = validation_elbo(model, val_loader)
        print(f"epoch {epoch:3d}  loss {running / len(train_loader):.4f}  "
              f"val ELBO {val:.1f}  (N = {n_gauge_records})")
    return model


def main():
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--epochs", type=int, default=CONFIG["epochs"])
    parser.add_argument("--out", default="checkpoints/stage_forecaster.pt")
    args = parser.parse_args()
    model = train({**CONFIG, "epochs": args.epochs})
    Path(args.out).parent.mkdir(parents=True, exist_ok=True)
    torch.save(model.state_dict(), args.out)


if __name__ == "__main__":
    main()
