"""Variational dropout with the local reparameterisation trick (per-weight alpha)."""
import torch
from torch import nn
import torch.nn.functional as F


class VDLinearLRT(nn.Module):
    def __init__(self, n_in, n_out, log_alpha_init=-4.0):
        super().__init__()
        self.theta = nn.Parameter(torch.empty(n_out, n_in).normal_(0, 0.05))
        self.bias = nn.Parameter(torch.zeros(n_out))
        self.log_alpha = nn.Parameter(torch.full((n_out, n_in), log_alpha_init))

    def forward(self, x):
        mu = F.linear(x, self.theta, self.bias)
        if not self.training:
            return mu
        var = F.linear(x.pow(2), self.log_alpha.exp() * self.theta.pow(2))
        return mu + torch.sqrt(var + 1e-8) * torch.randn_like(mu)


class CappedVDLinearLRT(VDLinearLRT):
    """Same layer with alpha capped at 1 (drop rate <= 0.5)."""

    def forward(self, x):
        mu = F.linear(x, self.theta, self.bias)
        if not self.training:
            return mu
        log_alpha = self.log_alpha.clamp(max=0.0)
        var = F.linear(x * x, log_alpha.exp() * self.theta ** 2)
        return mu + torch.sqrt(var + 1e-8) * torch.randn_like(mu)
