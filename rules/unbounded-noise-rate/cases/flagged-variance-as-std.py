# Gaussian dropout written with alpha as the noise std although alpha is the noise variance.
import torch
from torch import nn


class BandGaussianDropout(nn.Module):
    """Gaussian dropout on vibration bands with a fixed drop rate."""

    def __init__(self, p=0.2):
        super().__init__()
        self.alpha = p / (1 - p)

    def forward(self, x):
        if not self.training:
            return x
        return x * (torch.randn_like(x) * self.alpha + 1)  # expect[unbounded-noise-rate]


class LearnedBandDropout(nn.Module):
    """Learned Gaussian dropout: the KL approximation below treats alpha as the variance."""

    C1, C2, C3 = 1.16145124, -1.50204118, 0.58629921

    def __init__(self, n_bands):
        super().__init__()
        self.log_alpha = nn.Parameter(torch.full((n_bands,), -2.0))

    def forward(self, x):
        noise = 1 + self.log_alpha.exp() * torch.randn_like(x)  # expect[unbounded-noise-rate]
        return x * noise

    def kl(self):
        alpha = self.log_alpha.exp()
        return -(0.5 * self.log_alpha + self.C1 * alpha + self.C2 * alpha ** 2 + self.C3 * alpha ** 3).sum()


class DocumentedNoise(nn.Module):
    def __init__(self, n):
        super().__init__()
        # alpha: the variance of the multiplicative noise, kept below 1
        self.alpha = nn.Parameter(torch.full((n,), 0.5))

    def forward(self, x):
        return x * (1 + torch.randn_like(x) * self.alpha.clamp(max=1.0))  # expect[unbounded-noise-rate]
