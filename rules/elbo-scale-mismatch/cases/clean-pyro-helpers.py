# Look-alikes of Pyro fitting helpers for the soil-moisture drift model: helpers given a rescaling model, a factory
# stepped on the full season, a helper that only predicts, and one factory used with two models fed differently.
import pyro
import pyro.distributions as dist
import torch
from pyro.infer import SVI, Predictive, Trace_ELBO
from pyro.infer.autoguide import AutoNormal
from torch.utils.data import DataLoader, TensorDataset

days = torch.rand(6_000) * 180.0
reading = 0.25 + 2e-4 * days + 0.01 * torch.randn(6_000)
n_readings = len(days)
readings_loader = DataLoader(TensorDataset(days, reading), batch_size=200, shuffle=True)


def subsampled_model(day, moisture=None):
    drift = pyro.sample("drift", dist.Normal(0.0, 1e-3))
    with pyro.plate("readings", n_readings, subsample_size=len(day)):
        pyro.sample("obs", dist.Normal(0.25 + drift * day, 0.01), obs=moisture)


def season_model(day, moisture=None):
    drift = pyro.sample("drift", dist.Normal(0.0, 1e-3))
    with pyro.plate("readings", len(day)):
        pyro.sample("obs", dist.Normal(0.25 + drift * day, 0.01), obs=moisture)


def fit(model, loader, epochs=2):
    guide = AutoNormal(model)
    svi = SVI(model, guide, pyro.optim.Adam({"lr": 1e-2}), loss=Trace_ELBO())
    for _ in range(epochs):
        for day_batch, moisture_batch in loader:
            svi.step(day_batch, moisture_batch)
    return guide


def make_svi(model, lr=1e-2):
    return SVI(model, AutoNormal(model), pyro.optim.Adam({"lr": lr}), loss=Trace_ELBO())


def predict(model, guide, day):
    return Predictive(model, guide=guide, num_samples=100)(day)


def main(steps=500):
    guide = fit(subsampled_model, readings_loader)
    full = make_svi(season_model)
    for _ in range(steps):
        full.step(days, reading)
    batched = make_svi(subsampled_model)
    for day_batch, moisture_batch in readings_loader:
        batched.step(day_batch, moisture_batch)
    return predict(season_model, guide, days[:10])
