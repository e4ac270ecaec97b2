"""Multiplicative N(1, alpha) noise on hidden activations (Gaussian dropout variants)."""
import torch
from torch import nn


class LearnedGaussianNoise(nn.Module):
    """Learned per-unit alpha, stored directly."""

    def __init__(self, n_units, alpha_init=0.25):
        super().__init__()
        self.alpha = nn.Parameter(torch.full((n_units,), alpha_init))

    def forward(self, h):
        if not self.training:
            return h
        return h * (1 + torch.sqrt(self.alpha) * torch.randn_like(h))


class FixedGaussianNoise(nn.Module):
    """Constant rate: alpha = p / (1 - p), same mean and variance as dropout with drop rate p."""

    def __init__(self, p=0.2):
        super().__init__()
        self.register_buffer("alpha", torch.tensor(p / (1 - p)))

    def forward(self, h):
        if not self.training:
            return h
        return h * (1 + self.alpha.sqrt() * torch.randn_like(h))


class SigmoidGaussianNoise(nn.Module):
    """alpha = sigmoid(a) keeps the noise variance below 1."""

    def __init__(self, n_units, a_init=-1.0):
        super().__init__()
        self.a = nn.Parameter(torch.full((n_units,), a_init))

    def forward(self, h):
        if not self.training:
            return h
        alpha = torch.sigmoid(self.a)
        return h * (1 + alpha.sqrt() * torch.randn_like(h))
