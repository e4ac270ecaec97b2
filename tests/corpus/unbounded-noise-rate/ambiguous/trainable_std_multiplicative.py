"""AMBIGUOUS: multiplicative weight noise whose *std* (softplus of rho) is trained, not alpha.

w * (1 + sigma * eps) is the same noise as alpha = sigma^2, unbounded above; RULES.md speaks
of "a trainable alpha / log alpha" and does not say whether a trainable relative std counts.
"""
import torch
from torch import nn
import torch.nn.functional as F


class RelNoiseLinear(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.weight = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.rho = nn.Parameter(torch.full((n_out, n_in), -2.0))

    def forward(self, x):
        sigma = F.softplus(self.rho)
        return F.linear(x, self.weight * (1 + sigma * torch.randn_like(sigma)))
