"""Trainable tensors named like scales, or sitting next to noise, that are never used as a std."""
import torch
from torch import nn
from torch.distributions import Normal


class StageShift(nn.Module):
    """'sigma' here is a learned location shift of the forecast, in metres."""

    def __init__(self, n_stations):
        super().__init__()
        self.sigma = nn.Parameter(torch.zeros(n_stations))
        self.gain = nn.Parameter(torch.ones(n_stations))
        self.offset = nn.Parameter(torch.zeros(n_stations))

    def forward(self, stage):
        return self.gain * stage + self.sigma

    def prior_on_shift(self):
        return Normal(self.sigma, 1.0)

    def augment(self, stage):
        return stage + self.offset + 0.05 * torch.randn_like(stage)


class RbfRainKernel(nn.Module):
    """Gaussian (RBF) kernel between rainfall windows with a learned length-scale."""

    def __init__(self):
        super().__init__()
        self.lengthscale = nn.Parameter(torch.tensor(3.0))
        self.temperature = nn.Parameter(torch.tensor(1.5))

    def forward(self, a, b):
        d2 = torch.cdist(a, b) ** 2
        return torch.exp(-d2 / (2 * self.lengthscale ** 2))

    def calibrated_logits(self, logits):
        return logits / self.temperature


class EnsembleMixer(nn.Module):
    """Learned mixing weights of ensemble members; sigma_w is a per-member gain, not a std."""

    def __init__(self, n_members):
        super().__init__()
        self.logit_w = nn.Parameter(torch.zeros(n_members))
        self.sigma_w = nn.Parameter(torch.ones(n_members))

    def forward(self, member_preds):
        w = torch.softmax(self.logit_w, dim=0)
        return (w[:, None] * member_preds).sum(0)

    def scaled(self, member_preds):
        return (self.sigma_w[:, None] * member_preds).mean(0)
