"""Bayesian MLP: probe covariates (temp, EC, days since install, ...) -> drift-corrected VWC."""
import torch
from torch import nn
import pyro
import pyro.distributions as dist
from pyro.nn import PyroModule, PyroSample


class MoistureBNN(PyroModule):
    def __init__(self, n_features=6, hidden=32, prior_scale=1.0):
        super().__init__()
        self.fc1 = PyroModule[nn.Linear](n_features, hidden)
        self.fc1.weight = PyroSample(dist.Normal(0.0, prior_scale).expand([hidden, n_features]).to_event(2))
        self.fc1.bias = PyroSample(dist.Normal(0.0, prior_scale).expand([hidden]).to_event(1))
        self.fc2 = PyroModule[nn.Linear](hidden, 1)
        self.fc2.weight = PyroSample(dist.Normal(0.0, prior_scale).expand([1, hidden]).to_event(2))
        self.fc2.bias = PyroSample(dist.Normal(0.0, prior_scale).expand([1]).to_event(1))

    def forward(self, x, y=None):
        h = torch.tanh(self.fc1(x))
        mean = self.fc2(h).squeeze(-1)
        sigma = pyro.sample("sigma", dist.HalfNormal(0.05))
        with pyro.plate("data"):
            pyro.sample("obs", dist.Normal(mean, sigma), obs=y)
        return mean
