# Learned Gaussian dropout on rainfall features, clipped to the reference code's [-8, 8].
import torch
from torch import nn


class RainGaussianDropout(nn.Module):
    def __init__(self, n_features):
        super().__init__()
        self.log_alpha = nn.Parameter(torch.full((n_features,), -2.0))

    def forward(self, x):
        log_alpha = torch.clamp(self.log_alpha, -8.0, 8.0)
        return x * (1 + torch.exp(0.5 * log_alpha) * torch.randn_like(x))
