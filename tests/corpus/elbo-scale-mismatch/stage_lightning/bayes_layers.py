"""Bayesian output head: per-station stage mean and variance."""
import torch
from torch import nn
import torch.nn.functional as F


class BayesHead(nn.Module):
    def __init__(self, n_in, n_out, prior_sd=0.5):
        super().__init__()
        self.w_mu = nn.Parameter(torch.zeros(2 * n_out, n_in))
        self.w_log_sd = nn.Parameter(torch.full((2 * n_out, n_in), -4.0))
        self.prior_sd = prior_sd

    def forward(self, h):
        w = self.w_mu + self.w_log_sd.exp() * torch.randn_like(self.w_mu)
        mu, raw = F.linear(h, w).chunk(2, dim=-1)
        return mu, F.softplus(raw) + 1e-5

    def kl_divergence(self):
        var_ratio = (self.w_log_sd.exp() / self.prior_sd) ** 2
        t = (self.w_mu / self.prior_sd) ** 2
        return 0.5 * (var_ratio + t - 1 - var_ratio.log()).sum()
