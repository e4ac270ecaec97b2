import torch
import torch.nn.functional as F
from torch import nn


class StageBayesLinear(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.w_mu = nn.Parameter(torch.zeros(n_out, n_in))
        self.log_w_sigma = nn.Parameter(torch.full((n_out, n_in), -2.302585093))

    def forward(self, x):
        w = self.w_mu + self.log_w_sigma.exp() * torch.randn_like(self.w_mu)
        return F.linear(x, w)

    def kl(self):
        return (-torch.log(self.log_w_sigma.exp()) + (self.log_w_sigma.exp() ** 2 + self.w_mu ** 2) / 2 - 0.5).sum()
