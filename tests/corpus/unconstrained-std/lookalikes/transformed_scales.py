"""Trainable scales that go through a positive transform before use: none should be reported."""
import math

import torch
import torch.nn as nn
import torch.nn.functional as F
from torch.nn.functional import softplus as sp
from torch.distributions import Normal, kl_divergence


class StageLayerExp(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.mu = nn.Parameter(torch.zeros(n_out, n_in))
        self.log_sigma = nn.Parameter(torch.full((n_out, n_in), -5.0))
        self.logvar_b = nn.Parameter(torch.full((n_out,), -10.0))
        self.mu_b = nn.Parameter(torch.zeros(n_out))

    def forward(self, x):
        sigma = self.log_sigma.exp()
        w = self.mu + sigma * torch.randn_like(self.mu)
        b = self.mu_b + torch.exp(0.5 * self.logvar_b) * torch.randn_like(self.mu_b)
        return F.linear(x, w, b)

    def kl(self):
        log_sigma = self.log_sigma
        sigma = torch.exp(log_sigma)
        kl_w = (-log_sigma + 0.5 * (sigma ** 2 + self.mu ** 2) - 0.5).sum()
        kl_b = -0.5 * torch.sum(1 + self.logvar_b - self.mu_b.pow(2) - self.logvar_b.exp())
        return kl_w + kl_b


class StageLayerSoftplus(nn.Module):
    def __init__(self, n_in, n_out, sigma0=0.01):
        super().__init__()
        self.mu = nn.Parameter(torch.zeros(n_out, n_in))
        self.rho = nn.Parameter(torch.full((n_out, n_in), math.log(math.expm1(sigma0))))
        self.rho_b = nn.Parameter(torch.full((n_out,), -4.6))
        self.mu_b = nn.Parameter(torch.zeros(n_out))
        self.positive = nn.Softplus()

    @property
    def sigma(self):
        return F.softplus(self.rho)

    def forward(self, x):
        w = self.mu + self.sigma * torch.randn_like(self.mu)
        b_sd = torch.nn.functional.softplus(self.rho_b) + 1e-6
        b = self.mu_b + b_sd * torch.randn_like(self.mu_b)
        return F.linear(x, w, b)

    def kl(self, prior_sigma=1.0):
        q = Normal(self.mu, self.positive(self.rho))
        p = Normal(torch.zeros_like(self.mu), prior_sigma)
        return kl_divergence(q, p).sum()


class PumpNoiseHead(nn.Module):
    """Bounded and hand-written positive scales."""

    def __init__(self, n_out, max_sd=0.5):
        super().__init__()
        self.max_sd = max_sd
        self.s_raw = nn.Parameter(torch.zeros(n_out))
        self.rho = nn.Parameter(torch.full((n_out,), -3.0))
        self.beta_rho = nn.Parameter(torch.full((n_out,), -3.0))

    def forward(self, mean):
        sd = self.max_sd * torch.sigmoid(self.s_raw)
        return mean + sd * torch.randn_like(mean)

    def blundell(self, mean):
        sd = torch.log1p(torch.exp(self.rho))
        return Normal(mean, sd)

    def sharper(self, mean):
        return mean + sp(self.beta_rho, beta=2.0) * torch.randn_like(mean)
