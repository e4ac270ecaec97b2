# River-stage forecaster layers: raw trainable standard deviations used directly.
import torch
import torch.distributions as D
from torch import nn


class StageBayesLinear(nn.Module):
    def __init__(self, n_in, n_out, prior_sigma=1.0):
        super().__init__()
        self.w_mu = nn.Parameter(torch.zeros(n_out, n_in))
        self.w_sigma = nn.Parameter(torch.full((n_out, n_in), 0.05))
        self.b_mu = nn.Parameter(torch.zeros(n_out))
        self.b_sigma = nn.Parameter(0.05 * torch.ones(n_out))
        self.prior_sigma = prior_sigma

    def forward(self, x):
        eps = torch.randn_like(self.w_mu)
        w = self.w_mu + self.w_sigma * eps
        #               ^^^^^^^^^^^^ expect[unconstrained-std]
        b = D.Normal(self.b_mu, scale=self.b_sigma).rsample()  # expect[unconstrained-std]
        return x @ w.t() + b


class RainfallEncoder(nn.Module):
    def __init__(self, width):
        super().__init__()
        self.loc = nn.Parameter(torch.zeros(width))
        self.spread = nn.Parameter(torch.tensor(0.3))

    def forward(self, rain):
        noise = torch.randn(rain.shape[0], self.loc.shape[0])
        spread = self.spread
        h = self.loc + noise * spread.unsqueeze(0)  # expect[unconstrained-std]
        draw = torch.normal(self.loc, 2.0 * self.spread)  # expect[unconstrained-std]
        return h + draw
