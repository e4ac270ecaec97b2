# Soil-moisture drift in Pyro, fed correctly: plates that rescale minibatches, or full-batch SVI.
import pyro
import pyro.distributions as dist
import torch
from pyro import poutine
from pyro.infer import SVI, Trace_ELBO
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


def indexed_model(day, moisture=None, idx=None):
    drift = pyro.sample("drift", dist.Normal(0.0, 1e-3))
    with pyro.plate("readings", n_readings, subsample=idx):
        pyro.sample("obs", dist.Normal(0.25 + drift * day, 0.01), obs=moisture)


@poutine.scale(scale=n_readings / 200)
def scaled_model(day, moisture=None):
    drift = pyro.sample("drift", dist.Normal(0.0, 1e-3))
    with pyro.plate("readings", len(day)):
        pyro.sample("obs", dist.Normal(0.25 + drift * day, 0.01), obs=moisture)


def context_scaled_model(day, moisture=None):
    drift = pyro.sample("drift", dist.Normal(0.0, 1e-3))
    with poutine.scale(scale=n_readings / len(day)):
        with pyro.plate("readings", len(day)):
            pyro.sample("obs", dist.Normal(0.25 + drift * day, 0.01), obs=moisture)


def full_data_model(day, moisture=None):
    drift = pyro.sample("drift", dist.Normal(0.0, 1e-3))
    with pyro.plate("readings", len(day)):
        pyro.sample("obs", dist.Normal(0.25 + drift * day, 0.01), obs=moisture)


def prior_only_plate(day, moisture=None):
    with pyro.plate("sensors", 12):
        pyro.sample("offset", dist.Normal(0.0, 0.05))


def fit_minibatches(epochs=2):
    for model in (subsampled_model, scaled_model, context_scaled_model, prior_only_plate):
        svi = SVI(model, AutoNormal(model), pyro.optim.Adam({"lr": 1e-2}), loss=Trace_ELBO())
        for _ in range(epochs):
            for day_batch, moisture_batch in readings_loader:
                svi.step(day_batch, moisture_batch)


def fit_indexed(epochs=2):
    svi = SVI(indexed_model, AutoNormal(indexed_model), pyro.optim.Adam({"lr": 1e-2}), loss=Trace_ELBO())
    for _ in range(epochs):
        for idx in torch.randperm(n_readings).split(200):
            svi.step(days[idx], reading[idx], idx=idx)


def fit_full_batch(steps=500):
    svi = SVI(full_data_model, AutoNormal(full_data_model), pyro.optim.Adam({"lr": 1e-2}), loss=Trace_ELBO())
    for _ in range(steps):
        svi.step(days, reading)
