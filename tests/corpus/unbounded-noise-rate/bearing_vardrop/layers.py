"""Variational (Gaussian) dropout on the weights: w * (1 + sqrt(alpha) * eps), learned alpha per weight."""
import torch
from torch import nn
import torch.nn.functional as F

# coefficients of the polynomial approximation of -KL for the log-uniform prior
C1, C2, C3 = 1.16145124, -1.50204118, 0.58629921


class GaussianDropoutLinear(nn.Module):
    def __init__(self, n_in, n_out, log_alpha_init=-3.0):
        super().__init__()
        self.weight = nn.Parameter(torch.empty(n_out, n_in))
        nn.init.kaiming_uniform_(self.weight, a=5 ** 0.5)
        self.bias = nn.Parameter(torch.zeros(n_out))
        self.log_alpha = nn.Parameter(torch.full((n_out, n_in), log_alpha_init))

    def forward(self, x):
        if not self.training:
            return F.linear(x, self.weight, self.bias)
        alpha = self.log_alpha.exp()
        noisy_w = self.weight * (1 + alpha.sqrt() * torch.randn_like(self.weight))
        return F.linear(x, noisy_w, self.bias)

    def kl(self):
        alpha = self.log_alpha.exp()
        neg_kl = 0.5 * self.log_alpha + C1 * alpha + C2 * alpha ** 2 + C3 * alpha ** 3
        return -neg_kl.sum()
