# Soil-moisture drift: the observation plate is sized by the minibatch; the dataset size is a module constant.
import pyro
import pyro.distributions as dist
import torch
from pyro.infer import SVI, Trace_ELBO
from pyro.infer.autoguide import AutoNormal
from torch.utils.data import DataLoader, TensorDataset

days = torch.rand(4_000) * 180.0
reading = 0.25 + 2e-4 * days + 0.01 * torch.randn(4_000)
readings = TensorDataset(days, reading)
n_readings = len(readings)


def drift_model(day, moisture=None):
    drift = pyro.sample("drift", dist.Normal(0.0, 1e-3))
    with pyro.plate("readings", len(day)):
        pyro.sample("obs", dist.Normal(0.25 + drift * day, 0.01), obs=moisture)


def fit(epochs=2):
    loader = DataLoader(readings, batch_size=128, shuffle=True)
    svi = SVI(drift_model, AutoNormal(drift_model), pyro.optim.Adam({"lr": 1e-2}), loss=Trace_ELBO())
    for _ in range(epochs):
        for day_batch, moisture_batch in loader:
            svi.step(day_batch, moisture_batch)
