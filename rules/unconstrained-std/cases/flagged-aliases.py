# Pump-bearing feature noise: the same mistake written through aliases, properties and helpers.
import torch
from torch.nn import Module
from torch.nn import Parameter as P
from torch.distributions import Normal as Gaussian


def perturb(mean, std):
    return mean + std * torch.randn_like(mean)


class BearingNoise(Module):
    def __init__(self, n):
        super().__init__()
        self.centre = P(torch.zeros(n))
        self.raw_scale = P(torch.ones(n) * 0.2)
        self.jitter = torch.full((n,), 0.1, requires_grad=True)
        self.extra = torch.zeros(n).requires_grad_()

    @property
    def scale(self):
        return self.raw_scale

    def current_jitter(self):
        return self.jitter

    def forward(self, x):
        s = self.scale
        a = self.centre + s * torch.randn_like(x)  # expect[unconstrained-std]
        b = Gaussian(self.centre, self.current_jitter()).sample()  # expect[unconstrained-std]
        c = perturb(self.centre, self.extra)  # expect[unconstrained-std]
        return a + b + c
