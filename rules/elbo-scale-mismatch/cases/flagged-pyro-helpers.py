# Soil-moisture drift in Pyro where the model reaches SVI through helpers: a fitting function that receives the
# model, a factory that returns the SVI object, and a fitting class that keeps it.
import pyro
import pyro.distributions as dist
import torch
from pyro.infer import SVI, Trace_ELBO
from pyro.infer.autoguide import AutoNormal
from torch.utils.data import DataLoader, TensorDataset

days = torch.rand(6_000) * 180.0
reading = 0.25 + 2e-4 * days + 0.01 * torch.randn(6_000)
readings_loader = DataLoader(TensorDataset(days, reading), batch_size=200, shuffle=True)


def drift_model(day, moisture=None):
    drift = pyro.sample("drift", dist.Normal(0.0, 1e-3))
    offset = pyro.sample("offset", dist.Normal(0.25, 0.05))
    with pyro.plate("readings", len(day)):  # expect[elbo-scale-mismatch]
        pyro.sample("obs", dist.Normal(offset + drift * day, 0.01), obs=moisture)


def seasonal_model(day, moisture=None):
    amplitude = pyro.sample("amplitude", dist.Normal(0.0, 0.05))
    with pyro.plate("readings", size=day.shape[0]):  # expect[elbo-scale-mismatch]
        pyro.sample("obs", dist.Normal(0.25 + amplitude * torch.sin(day / 29.0), 0.01), obs=moisture)


def probe_model(day, moisture=None):
    bias = pyro.sample("bias", dist.Normal(0.0, 0.05))
    with pyro.plate("readings"):  # expect[elbo-scale-mismatch]
        pyro.sample("obs", dist.Normal(0.25 + bias + 0 * day, 0.01), obs=moisture)


def salinity_model(day, moisture=None):
    salinity = pyro.sample("salinity", dist.Normal(0.0, 0.02))
    with pyro.plate("readings", len(day)):  # expect[elbo-scale-mismatch]
        pyro.sample("obs", dist.Normal(0.25 + salinity + 0 * day, 0.01), obs=moisture)


def fit(model, loader, epochs=2):
    guide = AutoNormal(model)
    svi = SVI(model, guide, pyro.optim.Adam({"lr": 1e-2}), loss=Trace_ELBO())
    for _ in range(epochs):
        for day_batch, moisture_batch in loader:
            svi.step(day_batch, moisture_batch)
    return guide


def make_svi(model, lr=1e-2):
    return SVI(model, AutoNormal(model), pyro.optim.Adam({"lr": lr}), loss=Trace_ELBO())


class SeasonFitter:
    def __init__(self, model, loader):
        self.svi = SVI(model, AutoNormal(model), pyro.optim.ClippedAdam({"lr": 1e-2}), loss=Trace_ELBO())
        self.loader = loader

    def run(self, epochs=2):
        for _ in range(epochs):
            for day_batch, moisture_batch in self.loader:
                self.svi.step(day_batch, moisture_batch)


def main():
    fit(drift_model, readings_loader)
    svi = make_svi(seasonal_model)
    for day_batch, moisture_batch in readings_loader:
        svi.step(day_batch, moisture_batch)
    SeasonFitter(probe_model, readings_loader).run()
    splatted = make_svi(salinity_model)
    for batch in readings_loader:
        splatted.step(*batch)
