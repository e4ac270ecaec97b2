# Look-alikes with an epsilon on the noise std that stay quiet: the rate is clamped at alpha <= 1 (the epsilon moves
# the bound by a negligible amount), the noise is additive, or alpha is fixed.
import math

import torch
import torch.nn.functional as F
from torch import nn
from torch.distributions import Normal


class ClampedLeafVDLinear(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.theta = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.log_alpha = nn.Parameter(torch.full((n_out, n_in), -4.0))

    def forward(self, x):
        std = torch.exp(0.5 * self.log_alpha.clamp(max=0.0)) * self.theta.abs() + 1e-8
        return F.linear(x, Normal(self.theta, std).rsample())

    def forward_factor(self, x):
        s = torch.exp(0.5 * self.log_alpha.clamp(max=0.0)) + 1e-8
        return F.linear(x, self.theta * (1 + s * torch.randn_like(self.theta)))

    def forward_lrt(self, x):
        mu = F.linear(x, self.theta)
        var = F.linear(x ** 2, self.log_alpha.clamp(max=0.0).exp() * self.theta ** 2 + 1e-8)
        return mu + var.sqrt() * torch.randn_like(mu)


class AdditiveLeafLinear(nn.Module):
    """Trainable log sigma^2 of the weights (an absolute variance, not a rate), with an epsilon on the std."""

    def __init__(self, n_in, n_out):
        super().__init__()
        self.w_mu = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.w_log_sigma2 = nn.Parameter(torch.full((n_out, n_in), -9.0))

    def forward(self, x):
        w = Normal(self.w_mu, torch.exp(0.5 * self.w_log_sigma2) + 1e-8).rsample()
        return F.linear(x, w)

    def forward_sqrt(self, x):
        w = Normal(self.w_mu, torch.sqrt(self.w_log_sigma2.exp() + 1e-8)).rsample()
        return F.linear(x, w)

    def forward_lrt(self, x):
        mu = F.linear(x, self.w_mu)
        var = F.linear(x ** 2, self.w_log_sigma2.exp() + 1e-8)
        return mu + var.sqrt() * torch.randn_like(mu)


class FixedRateLeafLinear(nn.Module):
    """Gaussian dropout on the weights at a fixed alpha = 0.25 (drop rate 0.2)."""

    def __init__(self, n_in, n_out, alpha=0.25):
        super().__init__()
        self.theta = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.alpha = alpha

    def forward(self, x):
        w = Normal(self.theta, math.sqrt(self.alpha) * self.theta.abs() + 1e-8).rsample()
        return F.linear(x, w)
