"""python -m stage_lightning.train --max-epochs 50"""
import argparse

import lightning.pytorch as pl
import torch
from torch.utils.data import DataLoader, TensorDataset

from .module import StageForecaster


def invented_windows(n, n_stations=3, n_steps=72, seed=0):
    g = torch.Generator().manual_seed(seed)
    rain = torch.rand(n, n_steps, n_stations, generator=g).pow(5) * 10.0
    stage = 0.6 + 0.02 * rain[:, -24:].sum(1) + 0.03 * torch.randn(n, n_stations, generator=g)
    return TensorDataset(rain, stage)


if __name__ == "__main__":
    ap = argparse.ArgumentParser()
    ap.add_argument("--max-epochs", type=int, default=50)
    ap.add_argument("--batch-size", type=int, default=256)
    args = ap.parse_args()
    train_ds, val_ds = invented_windows(20_000, seed=1), invented_windows(3_000, seed=2)
    model = StageForecaster(n_train=len(train_ds))
    trainer = pl.Trainer(max_epochs=args.max_epochs, accelerator="cpu")
    trainer.fit(model,
                DataLoader(train_ds, batch_size=args.batch_size, shuffle=True),
                DataLoader(val_ds, batch_size=1024))
