"""Gaussian dropout with a constant rate from the command line (no learned alpha)."""
import argparse
import math

import torch
from torch import nn


class GaussianDropout(nn.Module):
    def __init__(self, rate):
        super().__init__()
        self.alpha = rate / (1.0 - rate)

    def forward(self, x):
        if self.training and self.alpha > 0:
            return x * (1 + math.sqrt(self.alpha) * torch.randn_like(x))
        return x


class FrozenAlphaNoise(nn.Module):
    """alpha kept as a parameter for checkpoint compatibility, but frozen."""

    def __init__(self, n_units, alpha=0.25):
        super().__init__()
        self.log_alpha = nn.Parameter(torch.full((n_units,), math.log(alpha)), requires_grad=False)

    def forward(self, x):
        if not self.training:
            return x
        return x * (1 + self.log_alpha.exp().sqrt() * torch.randn_like(x))


if __name__ == "__main__":
    ap = argparse.ArgumentParser()
    ap.add_argument("--gd-rate", type=float, default=0.3)
    args = ap.parse_args()
    net = nn.Sequential(nn.Linear(32, 64), nn.ReLU(), GaussianDropout(args.gd_rate),
                        nn.Linear(64, 64), nn.ReLU(), FrozenAlphaNoise(64), nn.Linear(64, 5))
    print(net(torch.randn(4, 32)))
