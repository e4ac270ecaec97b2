"""A raw trainable std passed as an argument to a reparameterisation helper.

The helper body is shared by a correct caller (softplus) and a wrong one (raw parameter), so
it is open whether the finding belongs on the helper's `mu + sd * eps` line or on the call
site that passes the raw parameter. Not scored until the contract says which.
"""
import torch
from torch import nn
import torch.nn.functional as F


def reparam(mu, sd):
    return mu + sd * torch.randn_like(mu)


class SiltLayer(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.mu = nn.Parameter(torch.zeros(n_out, n_in))
        self.sd = nn.Parameter(torch.full((n_out, n_in), 0.02))
        self.rho = nn.Parameter(torch.full((n_out, n_in), -4.0))

    def forward(self, x):
        return F.linear(x, reparam(self.mu, self.sd))

    def forward_softplus(self, x):
        return F.linear(x, reparam(self.mu, F.softplus(self.rho)))
