# Correct parameterisations of the same layers: every σ goes through a positivity transform.
import torch
import torch.nn.functional as F
from torch import nn
from torch.distributions import Normal
from torch.nn.functional import softplus as sp


class StageBayesLinear(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.w_mu = nn.Parameter(torch.zeros(n_out, n_in))
        self.w_rho = nn.Parameter(torch.full((n_out, n_in), -3.0))
        self.b_log_sigma = nn.Parameter(torch.full((n_out,), -3.0))
        self.c_rho = nn.Parameter(torch.zeros(n_out))
        self.d_raw = nn.Parameter(torch.zeros(n_out))
        self.positive = nn.Softplus()

    @property
    def w_sigma(self):
        return F.softplus(self.w_rho)

    def forward(self, x):
        w = self.w_mu + self.w_sigma * torch.randn_like(self.w_mu)
        b = Normal(torch.zeros_like(self.b_log_sigma), self.b_log_sigma.exp()).rsample()
        c = self.positive(self.c_rho) * torch.randn_like(self.c_rho)
        d = 0.5 * torch.sigmoid(self.d_raw) * torch.randn_like(self.d_raw)
        e = torch.exp(0.5 * self.b_log_sigma) * torch.randn_like(self.b_log_sigma)
        f = sp(self.c_rho) * torch.randn(self.c_rho.shape)
        return x @ w.t() + b + c + d + e + f

    def kl(self):
        sigma = F.softplus(self.w_rho)
        return (-torch.log(sigma) + (sigma ** 2 + self.w_mu ** 2) / 2 - 0.5).sum()
