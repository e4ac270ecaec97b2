"""AMBIGUOUS: additive parameterisation, but the noise variance is rebuilt from the clipped log alpha.

log alpha is derived from the trainable log sigma^2 (additive parameterisation), which RULES.md
exempts "for the KL or for pruning"; here the derived alpha (clipped at 8) also sets the
LRT variance, which is neither of those uses.
"""
import torch
from torch import nn
import torch.nn.functional as F


class MixedSVDO(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.theta = nn.Parameter(torch.randn(n_out, n_in) * 0.02)
        self.log_sigma2 = nn.Parameter(torch.full((n_out, n_in), -10.0))

    def log_alpha(self):
        return (self.log_sigma2 - torch.log(self.theta ** 2 + 1e-8)).clamp(-8.0, 8.0)

    def forward(self, x):
        mu = F.linear(x, self.theta)
        var = F.linear(x * x, self.log_alpha().exp() * self.theta ** 2)
        return mu + torch.sqrt(var + 1e-8) * torch.randn_like(mu)
