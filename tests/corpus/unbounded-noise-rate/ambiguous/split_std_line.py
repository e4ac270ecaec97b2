"""AMBIGUOUS (location): the noise std is computed from log alpha on one line and used on the next.

The finding must appear (trainable, unbounded log alpha), but whether it belongs on the
`std = exp(0.5 * log_alpha)` line or on the `x * (1 + std * eps)` line is not settled.
"""
import torch
from torch import nn


class SplitVD(nn.Module):
    def __init__(self, n):
        super().__init__()
        self.log_alpha = nn.Parameter(torch.full((n,), -3.0))

    def forward(self, x):
        std = torch.exp(0.5 * self.log_alpha)
        eps = torch.randn_like(x)
        return x * (1 + std * eps)
