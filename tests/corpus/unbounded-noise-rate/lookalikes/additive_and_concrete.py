"""Learned noise that is not multiplicative Gaussian noise on weights/activations."""
import torch
from torch import nn
import torch.nn.functional as F


class InputJitter(nn.Module):
    """Additive Gaussian jitter on the rainfall inputs; alpha is the jitter variance (learned)."""

    def __init__(self, n_lags, log_alpha_init=-6.0):
        super().__init__()
        self.log_alpha = nn.Parameter(torch.full((n_lags,), log_alpha_init))

    def forward(self, rain):
        if not self.training:
            return rain
        return rain + torch.exp(0.5 * self.log_alpha) * torch.randn_like(rain)


class ConcreteDropout(nn.Module):
    """Relaxed-Bernoulli dropout with a learned drop probability."""

    def __init__(self, temperature=0.1, p_init=0.1):
        super().__init__()
        self.p_logit = nn.Parameter(torch.logit(torch.tensor(p_init)))
        self.temperature = temperature

    def forward(self, x):
        p = torch.sigmoid(self.p_logit)
        u = torch.rand_like(x)
        drop = torch.sigmoid((torch.log(p) - torch.log1p(-p) + torch.log(u) - torch.log1p(-u)) / self.temperature)
        return x * (1 - drop) / (1 - p)


class ARDLinear(nn.Module):
    """Mean-field layer with a learned ARD prior precision alpha per input (used only in the KL)."""

    def __init__(self, n_in, n_out):
        super().__init__()
        self.mu = nn.Parameter(torch.zeros(n_out, n_in))
        self.rho = nn.Parameter(torch.full((n_out, n_in), -5.0))
        self.log_alpha = nn.Parameter(torch.zeros(1, n_in))

    def forward(self, x):
        sd = F.softplus(self.rho)
        return F.linear(x, self.mu + sd * torch.randn_like(sd))

    def kl(self):
        sd = F.softplus(self.rho)
        prior_var = torch.exp(-self.log_alpha)
        return 0.5 * ((sd ** 2 + self.mu ** 2) / prior_var - 1 - torch.log(sd ** 2 / prior_var)).sum()
