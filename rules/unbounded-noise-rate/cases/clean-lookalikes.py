# Look-alikes of learned multiplicative noise that are bounded, fixed, or additive: none may be flagged.
import math

import torch
import torch.nn.functional as F
from torch import nn


class SparseVDLinear(nn.Module):
    """Additive parameterisation: theta and log sigma^2 are trained, log alpha is only derived for KL and pruning."""

    def __init__(self, n_in, n_out, threshold=3.0):
        super().__init__()
        self.theta = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.log_sigma2 = nn.Parameter(torch.full((n_out, n_in), -10.0))
        self.threshold = threshold

    @property
    def log_alpha(self):
        return torch.clamp(self.log_sigma2 - torch.log(self.theta ** 2 + 1e-8), -8.0, 8.0)

    def forward(self, x):
        if self.training:
            mu = F.linear(x, self.theta)
            var = F.linear(x * x, torch.exp(self.log_sigma2))
            return mu + torch.sqrt(var + 1e-8) * torch.randn_like(mu)
        return F.linear(x, self.theta * (self.log_alpha < self.threshold).float())

    def forward_derived(self, x):
        # alpha derived from the additive parameters: theta * (1 + sqrt(alpha) * eps) == theta + sigma * eps.
        w = self.theta * (1 + torch.exp(0.5 * self.log_alpha) * torch.randn_like(self.theta))
        return F.linear(x, w)

    def kl(self):
        k1, k2, k3 = 0.63576, 1.87320, 1.48695
        la = self.log_alpha
        return -(k1 * torch.sigmoid(k2 + k3 * la) - 0.5 * torch.log1p(torch.exp(-la)) - k1).sum()


class FixedGaussianDropout(nn.Module):
    """Gaussian dropout with a constant rate: alpha = p / (1 - p) is a float, not trained."""

    def __init__(self, p=0.2):
        super().__init__()
        self.alpha = p / (1.0 - p)

    def forward(self, x):
        if not self.training:
            return x
        return x * (1 + math.sqrt(self.alpha) * torch.randn_like(x))


class BufferedGaussianDropout(nn.Module):
    def __init__(self, n, p=0.3):
        super().__init__()
        self.register_buffer("alpha", torch.full((n,), p / (1 - p)))
        self.frozen_log_alpha = nn.Parameter(torch.zeros(n), requires_grad=False)

    def forward(self, x):
        y = x * (1 + self.alpha.sqrt() * torch.randn_like(x))
        return y * (1 + torch.exp(0.5 * self.frozen_log_alpha) * torch.randn_like(y))


class ClampedNoise(nn.Module):
    """Trainable log alpha, clamped at 0 (alpha <= 1) or squashed below 1 where it is read."""

    def __init__(self, n):
        super().__init__()
        self.log_alpha = nn.Parameter(torch.full((n,), -3.0))
        self.raw_rate = nn.Parameter(torch.zeros(n))

    def forward(self, x):
        a = x * (1 + torch.exp(0.5 * self.log_alpha.clamp(max=0.0)) * torch.randn_like(x))
        b = a * (1 + torch.sqrt(torch.sigmoid(self.raw_rate)) * torch.randn_like(a))
        c = b * (1 + torch.exp(0.5 * torch.clamp(self.log_alpha, -8.0, 0.0)) * torch.randn_like(b))
        return c * (1 + torch.minimum(self.log_alpha, torch.tensor(0.0)).div(2).exp() * torch.randn_like(c))


class AdditiveWeightNoise(nn.Module):
    """Bayes-by-backprop style: the trainable log variance is an absolute weight variance, not a rate."""

    def __init__(self, n_in, n_out):
        super().__init__()
        self.w_mu = nn.Parameter(torch.zeros(n_out, n_in))
        self.w_log_var = nn.Parameter(torch.full((n_out, n_in), -9.0))

    def forward(self, x):
        w = self.w_mu + torch.exp(0.5 * self.w_log_var) * torch.randn_like(self.w_mu)
        out_var = F.linear(x ** 2, self.w_log_var.exp())
        return F.linear(x, w) + out_var.sqrt() * torch.randn(x.shape[0], self.w_mu.shape[0])


class PruningOnly(nn.Module):
    """A trainable log alpha that never sets a noise variance: it only gates weights for pruning."""

    def __init__(self, n_in, n_out):
        super().__init__()
        self.weight = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.log_alpha = nn.Parameter(torch.full((n_out, n_in), -5.0))

    def forward(self, x):
        return F.linear(x, self.weight * (self.log_alpha < 3.0).float())


class UnknownSquash(nn.Module):
    def __init__(self, n, squash):
        super().__init__()
        self.log_alpha = nn.Parameter(torch.zeros(n))
        self.squash = squash

    def forward(self, x):
        # An unknown callable may bound the rate: given the benefit of the doubt.
        return x * (1 + self.squash(self.log_alpha) * torch.randn_like(x))
