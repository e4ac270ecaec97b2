"""AMBIGUOUS: fixed alpha documented as a variance but used as the noise std (randn * alpha + 1).

Issue 4 asks for a second message of this rule for this pattern; RULES.md's contract for
unbounded-noise-rate says nothing about it, and alpha is fixed (which RULES.md exempts).
"""
import torch
from torch import nn


class GaussDrop(nn.Module):
    def __init__(self, p=0.3):
        super().__init__()
        self.alpha = p / (1 - p)  # variance of the multiplicative noise

    def forward(self, x):
        if self.training:
            return x * (torch.randn_like(x) * self.alpha + 1)
        return x
