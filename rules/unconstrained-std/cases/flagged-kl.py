# Closed-form Gaussian KL written by hand with the raw σ parameter.
import torch
from torch import nn


class GaugePosterior(nn.Module):
    def __init__(self, n):
        super().__init__()
        self.mu = nn.Parameter(torch.zeros(n))
        self.sigma = nn.Parameter(torch.full((n,), 0.1))

    def kl_to_standard_normal(self):
        return -0.5 * torch.sum(1 + torch.log(self.sigma ** 2) - self.mu ** 2 - self.sigma ** 2)  # expect[unconstrained-std]

    def kl_to_prior(self, prior_mu, prior_sigma):
        sigma = self.sigma
        kl = torch.log(prior_sigma / sigma) + (sigma.pow(2) + (self.mu - prior_mu) ** 2) / (2 * prior_sigma ** 2) - 0.5  # expect[unconstrained-std]
        return kl.sum()
