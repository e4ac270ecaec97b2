# Soil-moisture sensor drift in Pyro: observation plates that see minibatches but carry the minibatch size.
import pyro
import pyro.distributions as dist
import torch
from pyro.infer import SVI, Trace_ELBO
from pyro.infer.autoguide import AutoNormal
from pyro.nn import PyroModule, PyroSample
from torch.utils.data import DataLoader, TensorDataset

days = torch.rand(6_000) * 180.0
reading = 0.25 + 2e-4 * days + 0.01 * torch.randn(6_000)
readings_loader = DataLoader(TensorDataset(days, reading), batch_size=200, shuffle=True)


def drift_model(day, moisture=None):
    drift = pyro.sample("drift", dist.Normal(0.0, 1e-3))
    offset = pyro.sample("offset", dist.Normal(0.25, 0.05))
    with pyro.plate("readings", len(day)):  # expect[elbo-scale-mismatch]
        pyro.sample("obs", dist.Normal(offset + drift * day, 0.01), obs=moisture)


def unsized_model(day, moisture=None):
    drift = pyro.sample("drift", dist.Normal(0.0, 1e-3))
    with pyro.plate("readings"):  # expect[elbo-scale-mismatch]
        pyro.sample("obs", dist.Normal(0.25 + drift * day, 0.01), obs=moisture)


class ProbeRegression(PyroModule):
    def __init__(self):
        super().__init__()
        self.slope = PyroSample(dist.Normal(0.0, 1.0))

    def forward(self, day, moisture=None):
        mean = 0.25 + self.slope * day
        with pyro.plate("data", size=day.shape[0]):  # expect[elbo-scale-mismatch]
            return pyro.sample("obs", dist.Normal(mean, 0.01), obs=moisture)


def fit_with_loader(epochs=2):
    svi = SVI(drift_model, AutoNormal(drift_model), pyro.optim.Adam({"lr": 1e-2}), loss=Trace_ELBO())
    for _ in range(epochs):
        for day_batch, moisture_batch in readings_loader:
            svi.step(day_batch, moisture_batch)


def fit_with_index_batches(epochs=2, batch_size=150):
    svi = SVI(unsized_model, AutoNormal(unsized_model), pyro.optim.Adam({"lr": 1e-2}), loss=Trace_ELBO())
    for _ in range(epochs):
        for idx in torch.randperm(len(days)).split(batch_size):
            svi.step(days[idx], reading[idx])


def fit_module(epochs=2):
    model = ProbeRegression()
    guide = AutoNormal(model)
    svi = SVI(model, guide, pyro.optim.ClippedAdam({"lr": 1e-2}), loss=Trace_ELBO())
    for _ in range(epochs):
        for day_batch, moisture_batch in readings_loader:
            svi.step(day_batch, moisture_batch)
