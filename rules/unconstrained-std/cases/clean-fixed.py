# Look-alikes that must stay quiet: fixed scales, buffers, frozen tensors, σ used as a mean, constrained Pyro params.
import pyro
import pyro.distributions as dist
import torch
from pyro.distributions import constraints
from torch import nn


class PumpVibrationNoise(nn.Module):
    def __init__(self, n, noise_std=0.1):
        super().__init__()
        self.register_buffer("sensor_std", torch.full((n,), 0.05))
        self.frozen_std = nn.Parameter(torch.full((n,), 0.2), requires_grad=False)
        self.plain_std = torch.full((n,), 0.3)
        self.sigma = nn.Parameter(torch.zeros(n))
        self.noise_std = noise_std

    def forward(self, x):
        a = x + self.sensor_std * torch.randn_like(x)
        b = x + self.frozen_std * torch.randn_like(x)
        c = x + self.plain_std * torch.randn_like(x)
        d = x + self.noise_std * torch.randn_like(x)
        e = dist.Normal(self.sigma, 1.0).sample()
        f = x * self.sigma
        g = torch.normal(self.sigma, 0.1)
        return a + b + c + d + e + f + g


def moisture_guide(readings):
    loc = pyro.param("loc", torch.zeros(1))
    scale = pyro.param("scale", torch.ones(1), constraint=constraints.positive)
    pyro.sample("drift", dist.Normal(loc, scale))


def reparameterise(mu, log_var):
    std = torch.exp(0.5 * log_var)
    return mu + std * torch.randn_like(std)


def gain_schedule(weights, gain):
    return weights * gain
