# Learned drop rates that do bound alpha = p / (1 - p) at 1: p is kept at or below 0.5 (clamped, squashed, or its
# logit clamped at 0); and quotients of a rate that are not its odds, or a fixed rate.
import torch
from torch import nn


class CappedRateDropout(nn.Module):
    """Drop rate capped at 0.5, i.e. alpha <= 1, in four spellings."""

    def __init__(self, n_features):
        super().__init__()
        self.p_logit = nn.Parameter(torch.full((n_features,), -1.3862944))

    def forward(self, x):
        p = torch.sigmoid(self.p_logit).clamp(max=0.5)
        alpha = p / (1 - p)
        y = x * (1 + alpha.sqrt() * torch.randn_like(x))
        q = torch.clamp(torch.sigmoid(self.p_logit), 0.0, 0.5)
        y = y * (1 + torch.sqrt(q / (1 - q)) * torch.randn_like(y))
        r = torch.sigmoid(self.p_logit.clamp(max=0.0))
        y = y * (1 + torch.sqrt(r / (1 - r)) * torch.randn_like(y))
        s = 0.5 * torch.sigmoid(self.p_logit)
        return y * (1 + torch.sqrt(s / (1 - s)) * torch.randn_like(y))


class NotTheOdds(nn.Module):
    """p / (1 + p) is at most 1/2 for p in [0, 1]: a bounded rate, not the odds."""

    def __init__(self, n_features):
        super().__init__()
        self.p_logit = nn.Parameter(torch.zeros(n_features))

    def forward(self, x):
        p = torch.sigmoid(self.p_logit)
        alpha = p / (1 + p)
        return x * (1 + alpha.sqrt() * torch.randn_like(x))


class FixedRateDropout(nn.Module):
    """A fixed drop rate: alpha = 0.25 is a constant."""

    def __init__(self, p=0.2):
        super().__init__()
        self.p = p

    def forward(self, x):
        alpha = self.p / (1 - self.p)
        return x * (1 + alpha ** 0.5 * torch.randn_like(x))


class RelaxedBernoulliRate(nn.Module):
    """A learned drop rate used for a relaxed Bernoulli mask, not for Gaussian noise."""

    def __init__(self, n_features, temperature=0.1):
        super().__init__()
        self.p_logit = nn.Parameter(torch.full((n_features,), -2.0))
        self.temperature = temperature

    def forward(self, x):
        p = torch.sigmoid(self.p_logit)
        u = torch.rand_like(x)
        drop = torch.sigmoid((torch.log(p / (1 - p)) + torch.log(u / (1 - u))) / self.temperature)
        return x * (1 - drop) / (1 - p)
