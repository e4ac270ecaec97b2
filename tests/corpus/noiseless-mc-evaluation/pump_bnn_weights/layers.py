"""Weight-sampling layer: a fresh weight draw on every forward, in train and eval mode alike."""
import torch
from torch import nn
import torch.nn.functional as F


class BayesLinear(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.mu = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.rho = nn.Parameter(torch.full((n_out, n_in), -5.0))

    def forward(self, x):
        sd = F.softplus(self.rho)
        return F.linear(x, self.mu + sd * torch.randn_like(sd))
