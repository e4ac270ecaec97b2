# Gaussian dropout on vibration bands with a fixed rate, the noise std written as alpha.
import torch
from torch import nn


class BandGaussianDropout(nn.Module):
    def __init__(self, p=0.2):
        super().__init__()
        self.alpha = p / (1 - p)

    def forward(self, x):
        if not self.training:
            return x
        return x * (torch.randn_like(x) * self.alpha ** 0.5 + 1)
