"""Mean-field VI classifier for pump-bearing faults (32 band energies -> 5 fault classes)."""
import torch
from torch import nn
import torch.nn.functional as F
from torch.distributions import Normal, kl_divergence


class MFLinear(nn.Module):
    def __init__(self, n_in, n_out, prior_scale=1.0):
        super().__init__()
        self.loc = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.raw_scale = nn.Parameter(torch.full((n_out, n_in), -5.0))
        self.register_buffer("prior_loc", torch.zeros(n_out, n_in))
        self.register_buffer("prior_scale", torch.full((n_out, n_in), prior_scale))

    def posterior(self):
        return Normal(self.loc, F.softplus(self.raw_scale))

    def forward(self, x):
        return F.linear(x, self.posterior().rsample())

    def kl(self):
        return kl_divergence(self.posterior(), Normal(self.prior_loc, self.prior_scale)).sum()


class BearingMFVI(nn.Module):
    def __init__(self, n_bands=32, n_hidden=128, n_faults=5, prior_scale=1.0):
        super().__init__()
        self.layers = nn.ModuleList([
            MFLinear(n_bands, n_hidden, prior_scale),
            MFLinear(n_hidden, n_hidden, prior_scale),
            MFLinear(n_hidden, n_faults, prior_scale),
        ])

    def forward(self, x):
        for layer in self.layers[:-1]:
            x = F.relu(layer(x))
        return self.layers[-1](x)

    def kl(self):
        return sum(layer.kl() for layer in self.layers)
