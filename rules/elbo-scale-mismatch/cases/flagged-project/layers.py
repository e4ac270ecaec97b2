# Variational layers of the pump-bearing classifier; each knows its own KL to a standard-normal prior.
import torch
import torch.nn.functional as F
from torch import nn


class VariationalDense(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.weight_mu = nn.Parameter(torch.randn(n_out, n_in) * 0.1)
        self.weight_rho = nn.Parameter(torch.full((n_out, n_in), -5.0))

    def forward(self, x):
        std = F.softplus(self.weight_rho)
        return F.linear(x, self.weight_mu + std * torch.randn_like(std))

    def kl(self):
        std = F.softplus(self.weight_rho)
        return 0.5 * torch.sum(std ** 2 + self.weight_mu ** 2 - 1.0 - 2.0 * torch.log(std))
