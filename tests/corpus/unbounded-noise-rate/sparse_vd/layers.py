"""Sparse variational dropout (additive parameterisation): train theta and log sigma^2, derive log alpha."""
import torch
from torch import nn
import torch.nn.functional as F

K1, K2, K3 = 0.63576, 1.87320, 1.48695


class LinearSVDO(nn.Module):
    def __init__(self, n_in, n_out, threshold=3.0):
        super().__init__()
        self.theta = nn.Parameter(torch.empty(n_out, n_in).normal_(0, 0.02))
        self.bias = nn.Parameter(torch.zeros(n_out))
        self.log_sigma2 = nn.Parameter(torch.full((n_out, n_in), -10.0))
        self.threshold = threshold

    @property
    def log_alpha(self):
        log_alpha = self.log_sigma2 - torch.log(self.theta ** 2 + 1e-8)
        return torch.clamp(log_alpha, -8.0, 8.0)

    def forward(self, x):
        if self.training:
            mu = F.linear(x, self.theta, self.bias)
            var = F.linear(x * x, torch.exp(self.log_sigma2))
            return mu + torch.sqrt(var + 1e-8) * torch.randn_like(mu)
        mask = (self.log_alpha < self.threshold).float()
        return F.linear(x, self.theta * mask, self.bias)

    def kl(self):
        la = self.log_alpha
        neg_kl = K1 * torch.sigmoid(K2 + K3 * la) - 0.5 * torch.log1p(torch.exp(-la)) - K1
        return -neg_kl.sum()


class Conv1dSVDO(nn.Module):
    """Same idea for 1-D convolutions over vibration windows."""

    def __init__(self, c_in, c_out, k, threshold=3.0):
        super().__init__()
        self.theta = nn.Parameter(torch.empty(c_out, c_in, k).normal_(0, 0.02))
        self.log_sigma2 = nn.Parameter(torch.full((c_out, c_in, k), -10.0))
        self.threshold = threshold

    def log_alpha(self):
        return (self.log_sigma2 - 2.0 * torch.log(1e-8 + self.theta.abs())).clamp(-8.0, 8.0)

    def forward(self, x):
        if not self.training:
            return F.conv1d(x, self.theta * (self.log_alpha() < self.threshold).float())
        mu = F.conv1d(x, self.theta)
        std = torch.sqrt(1e-8 + F.conv1d(x.pow(2), self.log_sigma2.exp()))
        return mu + std * torch.randn_like(std)

    def kl(self):
        la = self.log_alpha()
        return -(K1 * torch.sigmoid(K2 + K3 * la) - 0.5 * F.softplus(-la) - K1).sum()
