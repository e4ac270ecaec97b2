"""Gaussian-dropout variants with learned rates and various bounds (pump-bearing features)."""
import torch
from torch import nn


class ClampedLogAlphaNoise(nn.Module):
    def __init__(self, n_units):
        super().__init__()
        self.log_alpha = nn.Parameter(torch.full((n_units,), -2.0))

    def forward(self, x):
        if not self.training:
            return x
        log_alpha = torch.clamp(self.log_alpha, max=2.0)
        return x * (1 + torch.exp(0.5 * log_alpha) * torch.randn_like(x))


class ScaledSigmoidNoise(nn.Module):
    """alpha in (0, 4)."""

    def __init__(self, n_units):
        super().__init__()
        self.a = nn.Parameter(torch.zeros(n_units))

    def forward(self, x):
        if not self.training:
            return x
        alpha = 4.0 * torch.sigmoid(self.a)
        return x * (1 + alpha.sqrt() * torch.randn_like(x))


class LearnedRateGaussianDropout(nn.Module):
    """Gaussian dropout whose drop rate p = sigmoid(p_logit) is learned; alpha = p / (1 - p)."""

    def __init__(self, n_units, p_init=0.1):
        super().__init__()
        self.p_logit = nn.Parameter(torch.full((n_units,), float(torch.logit(torch.tensor(p_init)))))

    def forward(self, x):
        if not self.training:
            return x
        p = torch.sigmoid(self.p_logit)
        alpha = p / (1 - p)
        return x * (1 + alpha.sqrt() * torch.randn_like(x))


class CappedRateGaussianDropout(LearnedRateGaussianDropout):
    """Drop rate capped at 0.5, i.e. alpha <= 1."""

    def forward(self, x):
        if not self.training:
            return x
        p = torch.sigmoid(self.p_logit).clamp(max=0.5)
        alpha = p / (1 - p)
        return x * (1 + alpha.sqrt() * torch.randn_like(x))


class BearingFeatureNet(nn.Module):
    def __init__(self, n_bands=32, n_faults=5, noise=CappedRateGaussianDropout):
        super().__init__()
        self.l1 = nn.Linear(n_bands, 64)
        self.noise = noise(64)
        self.out = nn.Linear(64, n_faults)

    def forward(self, x):
        return self.out(self.noise(torch.relu(self.l1(x))))


VARIANTS = {
    "clamp2": ClampedLogAlphaNoise,
    "sigmoid4": ScaledSigmoidNoise,
    "learned_p": LearnedRateGaussianDropout,
    "capped_p": CappedRateGaussianDropout,
}


def build(variant="capped_p"):
    return BearingFeatureNet(noise=VARIANTS[variant])
