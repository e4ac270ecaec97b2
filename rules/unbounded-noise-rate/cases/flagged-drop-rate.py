# Soil-moisture sensor nets with a learned Gaussian-dropout rate p = sigmoid(p_logit) and alpha = p / (1 - p): the
# sigmoid bounds p below 1, but the odds p / (1 - p) map [0, 1) onto [0, inf), so alpha = exp(p_logit) is unbounded.
import torch
import torch.nn.functional as F
from torch import nn


class LearnedRateDropout(nn.Module):
    """Gaussian dropout on the sensor features whose drop rate is learned."""

    def __init__(self, n_features, p_init=0.2):
        super().__init__()
        self.p_logit = nn.Parameter(torch.full((n_features,), float(torch.logit(torch.tensor(p_init)))))

    def forward(self, x):
        p = torch.sigmoid(self.p_logit)
        alpha = p / (1 - p)
        return x * (1 + alpha.sqrt() * torch.randn_like(x))  # expect[unbounded-noise-rate]

    def forward_inline(self, x):
        p = self.p_logit.sigmoid()
        return x * (1 + torch.sqrt(p / (1.0 - p)) * torch.randn_like(x))  # expect[unbounded-noise-rate]

    def forward_div(self, x):
        p = torch.sigmoid(self.p_logit)
        return x * (1 + p.div(1 - p).sqrt() * torch.randn_like(x))  # expect[unbounded-noise-rate]


class RatePropertyDropout(nn.Module):
    """The drop rate read through a property."""

    def __init__(self, n_features):
        super().__init__()
        self.p_logit = nn.Parameter(torch.full((n_features,), -1.3862944))

    @property
    def drop_rate(self):
        return torch.sigmoid(self.p_logit)

    def forward(self, x):
        alpha = self.drop_rate / (1 - self.drop_rate)
        return x * (1 + torch.sqrt(alpha) * torch.randn_like(x))  # expect[unbounded-noise-rate]


class DriftWeightNoise(nn.Module):
    """Multiplicative weight noise at a learned drop rate, on a linear drift model of 8 sensors."""

    def __init__(self, n_in=8, n_out=1):
        super().__init__()
        self.theta = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.p_logit = nn.Parameter(torch.full((n_out, n_in), -2.0))

    def forward(self, x):
        p = torch.sigmoid(self.p_logit)
        w = self.theta * (1 + torch.sqrt(p / (1 - p)) * torch.randn_like(self.theta))  # expect[unbounded-noise-rate]
        return F.linear(x, w)


class CappedAboveHalfDropout(nn.Module):
    """The drop rate is capped at 0.9, which still allows alpha up to 9."""

    def __init__(self, n_features):
        super().__init__()
        self.p_logit = nn.Parameter(torch.full((n_features,), -1.3862944))

    def forward(self, x):
        p = torch.sigmoid(self.p_logit).clamp(max=0.9)
        alpha = p / (1 - p)
        return x * (1 + alpha ** 0.5 * torch.randn_like(x))  # expect[unbounded-noise-rate]


class EpsilonOddsDropout(nn.Module):
    """An epsilon in the denominator caps alpha only at 1 / eps."""

    def __init__(self, n_features):
        super().__init__()
        self.p_logit = nn.Parameter(torch.full((n_features,), -1.3862944))

    def forward(self, x):
        p = torch.sigmoid(self.p_logit)
        return x * (1 + torch.sqrt(p / (1 - p + 1e-6)) * torch.randn_like(x))  # expect[unbounded-noise-rate]


class OddsAsStdDropout(nn.Module):
    """alpha = p / (1 - p) is the noise variance, but here it is used as the std."""

    def __init__(self, n_features):
        super().__init__()
        self.p_logit = nn.Parameter(torch.full((n_features,), -1.3862944))

    def forward(self, x):
        p = torch.sigmoid(self.p_logit)
        alpha = p / (1 - p)
        return x * (1 + alpha * torch.randn_like(x))  # expect[unbounded-noise-rate]
