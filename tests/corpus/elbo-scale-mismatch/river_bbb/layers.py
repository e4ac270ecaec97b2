"""Mean-field Gaussian linear layer used by the river-stage models."""
import math

import torch
from torch import nn
import torch.nn.functional as F


class BayesLinear(nn.Module):
    """Linear layer with a factorised Gaussian posterior over weights and biases.

    sigma = softplus(rho); prior N(0, prior_sd^2) on every weight.
    """

    def __init__(self, n_in, n_out, prior_sd=1.0, rho_init=-4.0):
        super().__init__()
        self.w_mu = nn.Parameter(torch.empty(n_out, n_in).uniform_(-0.1, 0.1))
        self.w_rho = nn.Parameter(torch.full((n_out, n_in), rho_init))
        self.b_mu = nn.Parameter(torch.zeros(n_out))
        self.b_rho = nn.Parameter(torch.full((n_out,), rho_init))
        self.prior_sd = prior_sd

    def forward(self, x):
        w_sd = F.softplus(self.w_rho)
        b_sd = F.softplus(self.b_rho)
        w = self.w_mu + w_sd * torch.randn_like(w_sd)
        b = self.b_mu + b_sd * torch.randn_like(b_sd)
        return F.linear(x, w, b)

    def kl(self):
        """KL(q || p) summed over all weights and biases (closed form)."""
        total = 0.0
        for mu, rho in ((self.w_mu, self.w_rho), (self.b_mu, self.b_rho)):
            sd = F.softplus(rho)
            total = total + (
                math.log(self.prior_sd) - torch.log(sd)
                + (sd ** 2 + mu ** 2) / (2 * self.prior_sd ** 2) - 0.5
            ).sum()
        return total
