# Variational-dropout linear layer for the pump classifier, with log alpha trained and unbounded.
import torch
import torch.nn.functional as F
from torch import nn


class PumpVDLinear(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.theta = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.log_sigma2 = nn.Parameter(torch.full((n_out, n_in), -4.0) + torch.log(self.theta.detach() ** 2 + 1e-8))

    @property
    def log_alpha(self):
        return self.log_sigma2 - torch.log(self.theta ** 2 + 1e-8)

    def forward(self, x):
        w = self.theta + torch.exp(0.5 * self.log_sigma2) * torch.randn_like(self.theta)
        return F.linear(x, w)

    def kl(self):
        k1, k2, k3 = 0.63576, 1.87320, 1.48695
        la = self.log_alpha
        return -(k1 * torch.sigmoid(k2 + k3 * la) - 0.5 * torch.log1p(torch.exp(-la)) - k1).sum()
