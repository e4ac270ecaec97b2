"""Leaf-spectrum classifier with multiplicative weight noise sampled from Normal(theta, sqrt(alpha)|theta|)."""
import torch
from torch import nn
import torch.nn.functional as F
from torch.distributions import Normal


class NoisyWeightLinear(nn.Module):
    def __init__(self, n_in, n_out, cap=False):
        super().__init__()
        self.theta = nn.Parameter(torch.randn(n_out, n_in) / n_in ** 0.5)
        self.log_alpha = nn.Parameter(torch.full((n_out, 1), -2.0))
        self.cap = cap

    def forward(self, x):
        if self.cap:
            log_alpha = self.log_alpha.clamp(max=0.0)
            w = Normal(self.theta, torch.exp(0.5 * log_alpha) * self.theta.abs() + 1e-8).rsample()
        else:
            w = Normal(self.theta, torch.exp(0.5 * self.log_alpha) * self.theta.abs() + 1e-8).rsample()
        return F.linear(x, w)


class LeafNet(nn.Module):
    def __init__(self, n_bands=120, n_classes=4):
        super().__init__()
        self.l1 = NoisyWeightLinear(n_bands, 64)
        self.l2 = NoisyWeightLinear(64, n_classes, cap=True)

    def forward(self, x):
        return self.l2(torch.tanh(self.l1(x)))
