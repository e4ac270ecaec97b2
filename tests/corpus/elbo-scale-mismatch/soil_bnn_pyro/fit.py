"""Fit MoistureBNN with SVI on minibatches of the calibration set (invented)."""
import torch
import pyro
from pyro.infer import SVI, Trace_ELBO
from pyro.infer.autoguide import AutoDiagonalNormal
from torch.utils.data import DataLoader, TensorDataset

from .bnn import MoistureBNN

CFG = {"batch_size": 256, "epochs": 200, "lr": 1e-2, "hidden": 32}


def calibration_set(n=6_000, seed=11):
    g = torch.Generator().manual_seed(seed)
    x = torch.randn(n, 6, generator=g)
    y = 0.25 + 0.04 * x[:, 0] - 0.02 * x[:, 1] * x[:, 2] + 0.01 * torch.randn(n, generator=g)
    return x, y


def main(cfg=CFG):
    pyro.clear_param_store()
    x, y = calibration_set()
    loader = DataLoader(TensorDataset(x, y), batch_size=cfg["batch_size"], shuffle=True)
    model = MoistureBNN(hidden=cfg["hidden"])
    guide = AutoDiagonalNormal(model)
    svi = SVI(model, guide, pyro.optim.Adam({"lr": cfg["lr"]}), loss=Trace_ELBO())
    for epoch in range(cfg["epochs"]):
        total = sum(svi.step(xb, yb) for xb, yb in loader)
        if epoch % 20 == 0:
            print(epoch, total / len(x))
    return model, guide


if __name__ == "__main__":
    main()
