"""Stochastic VI over the field season (invented readings), minibatches of 512."""
import argparse

import pyro
from pyro.infer import SVI, Trace_ELBO
from pyro.infer.autoguide import AutoNormal
from pyro.optim import ClippedAdam
from torch.utils.data import DataLoader, TensorDataset

from .model import drift_model, drift_model_subsampled
from .readings import load_season


def fit(model, epochs, batch_size, csv_path, pass_size=False):
    pyro.clear_param_store()
    days, temp, probe, reading = load_season(csv_path)
    loader = DataLoader(TensorDataset(days, temp, probe, reading), batch_size=batch_size, shuffle=True)
    guide = AutoNormal(model)
    svi = SVI(model, guide, ClippedAdam({"lr": 5e-3}), Trace_ELBO())
    for epoch in range(epochs):
        epoch_loss = 0.0
        for d, t, p, r in loader:
            if pass_size:
                epoch_loss += svi.step(d, t, p, r, n_total=len(loader.dataset))
            else:
                epoch_loss += svi.step(d, t, p, r)
        print(epoch, epoch_loss / len(loader.dataset))
    return guide


if __name__ == "__main__":
    ap = argparse.ArgumentParser()
    ap.add_argument("--csv", default="data/season_2023.csv")
    ap.add_argument("--subsample", action="store_true")
    ap.add_argument("--epochs", type=int, default=50)
    args = ap.parse_args()
    if args.subsample:
        fit(drift_model_subsampled, args.epochs, 512, args.csv, pass_size=True)
    else:
        fit(drift_model, args.epochs, 512, args.csv)
