"""Local reparameterisation with a raw trainable std, entering only through sigma ** 2.

The trainable tensor reaches the noise product via sqrt(x^2 @ (sigma^2)^T): squared, so never
negative, but sigma can still cross zero and its gradient vanishes there. Whether the rule
must follow the value through ** 2, a matmul and sqrt is not settled by RULES.md.
"""
import torch
from torch import nn
import torch.nn.functional as F


class LrtPumpLayer(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.w_mu = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.w_sigma = nn.Parameter(torch.full((n_out, n_in), 0.01))

    def forward(self, x):
        gamma = F.linear(x, self.w_mu)
        delta = F.linear(x ** 2, self.w_sigma ** 2)
        return gamma + torch.sqrt(delta + 1e-8) * torch.randn_like(gamma)
