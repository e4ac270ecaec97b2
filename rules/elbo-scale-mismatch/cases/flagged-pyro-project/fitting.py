# Generic SVI fitting loops of the soil-moisture project (they know nothing of the models they are given).
import pyro
from pyro.infer import SVI, Trace_ELBO
from pyro.infer.autoguide import AutoNormal


def build_svi(model, lr):
    return SVI(model, AutoNormal(model), pyro.optim.ClippedAdam({"lr": lr}), loss=Trace_ELBO())


def run_epochs(svi, loader, epochs):
    for _ in range(epochs):
        for day, probe, moisture in loader:
            svi.step(day, probe, moisture)


def fit(model, loader, epochs=50, lr=5e-3):
    svi = build_svi(model, lr)
    run_epochs(svi, loader, epochs)
