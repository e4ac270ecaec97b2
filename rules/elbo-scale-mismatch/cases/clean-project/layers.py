# Variational layers of the river-stage forecaster.
import torch
import torch.nn.functional as F
from torch import nn
from torch.distributions import Normal, kl_divergence


class StageLayer(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.mu = nn.Parameter(torch.zeros(n_out, n_in))
        self.rho = nn.Parameter(torch.full((n_out, n_in), -5.0))

    def forward(self, x):
        sigma = F.softplus(self.rho)
        return F.linear(x, self.mu + sigma * torch.randn_like(sigma))

    def kl(self):
        return kl_divergence(Normal(self.mu, F.softplus(self.rho)), Normal(0.0, 1.0)).sum()


class StageNet(nn.Module):
    def __init__(self):
        super().__init__()
        self.hidden = StageLayer(24, 32)
        self.head = StageLayer(32, 6)

    def forward(self, x):
        return self.head(torch.tanh(self.hidden(x)))

    def kl(self):
        return self.hidden.kl() + self.head.kl()
