import torch
import torch.nn.functional as F
from torch import nn


class StageBayesLinear(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.w_mu = nn.Parameter(torch.zeros(n_out, n_in))
        self.w_sigma_rho = nn.Parameter(torch.full((n_out, n_in), -2.252168461))

    def forward(self, x):
        w = self.w_mu + F.softplus(self.w_sigma_rho) * torch.randn_like(self.w_mu)
        return F.linear(x, w)

    def kl(self):
        return (-torch.log(F.softplus(self.w_sigma_rho)) + (F.softplus(self.w_sigma_rho) ** 2 + self.w_mu ** 2) / 2 - 0.5).sum()
