# Learned noise rates with a bound that is too loose (alpha above 1): still flagged, at a lower severity.
import torch
import torch.nn.functional as F
from torch import nn

ALPHA_CAP = 4.0


class PumpVDLinear(nn.Module):
    """Sparse-VD style weights with log alpha clipped to [-8, 8], as some reference code does."""

    def __init__(self, n_in, n_out):
        super().__init__()
        self.theta = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.log_alpha = nn.Parameter(torch.full((n_out, n_in), -6.0))

    def forward(self, x):
        log_alpha = torch.clamp(self.log_alpha, -8.0, 8.0)
        w = self.theta * (1 + torch.exp(0.5 * log_alpha) * torch.randn_like(self.theta))  # expect[unbounded-noise-rate]
        return F.linear(x, w)


class CappedBandNoise(nn.Module):
    """alpha = ALPHA_CAP * sigmoid(raw): bounded, but at alpha = 4."""

    def __init__(self, n_bands):
        super().__init__()
        self.raw = nn.Parameter(torch.zeros(n_bands))

    def rate(self):
        return ALPHA_CAP * torch.sigmoid(self.raw)

    def forward(self, x):
        return x * (1 + self.rate().sqrt() * torch.randn_like(x))  # expect[unbounded-noise-rate]


class PruneThresholdNoise(nn.Module):
    """Bounded exactly at the pruning threshold log alpha = 3 (drop rate 0.95)."""

    def __init__(self, width):
        super().__init__()
        self.log_alpha = nn.Parameter(torch.full((width,), -1.0))

    def forward(self, h):
        return h * (1 + self.log_alpha.clamp(max=3.0).mul(0.5).exp() * torch.randn_like(h))  # expect[unbounded-noise-rate]


class StationNoise(nn.Module):
    """Bounded in place after each step, but only at log alpha = 2."""

    def __init__(self, width):
        super().__init__()
        self.station_log_alpha = nn.Parameter(torch.full((width,), -1.0))

    def forward(self, h):
        return h * (1 + torch.exp(self.station_log_alpha / 2) * torch.randn_like(h))  # expect[unbounded-noise-rate]


def after_step(model):
    for m in model.modules():
        if isinstance(m, StationNoise):
            m.station_log_alpha.data.clamp_(max=2.0)
