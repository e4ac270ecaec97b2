# Soil-moisture drift: an observation plate without a size, fed minibatches of indices.
import pyro
import pyro.distributions as dist
import torch
from pyro.infer import SVI, Trace_ELBO
from pyro.infer.autoguide import AutoNormal

days = torch.rand(3_000) * 180.0
reading = 0.25 + 2e-4 * days + 0.01 * torch.randn(3_000)
n_readings = days.shape[0]


def drift_model(day, moisture=None):
    drift = pyro.sample("drift", dist.Normal(0.0, 1e-3))
    with pyro.plate("readings", n_readings, subsample_size=len(day)):
        pyro.sample("obs", dist.Normal(0.25 + drift * day, 0.01), obs=moisture)


def fit(epochs=2, batch_size=100):
    svi = SVI(drift_model, AutoNormal(drift_model), pyro.optim.Adam({"lr": 1e-2}), loss=Trace_ELBO())
    for _ in range(epochs):
        for idx in torch.randperm(n_readings).split(batch_size):
            svi.step(days[idx], reading[idx])
