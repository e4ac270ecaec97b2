"""Bearing-fault classifier with a scale-mixture prior; KL estimated by Monte Carlo (log q - log p)."""
import math

import torch
from torch import nn
import torch.nn.functional as F
from torch.utils.data import DataLoader, TensorDataset

PI, SIGMA1, SIGMA2 = 0.5, math.exp(-1), math.exp(-7)


def log_gaussian(x, mu, sigma):
    return (-0.5 * math.log(2 * math.pi) - torch.log(sigma) - (x - mu) ** 2 / (2 * sigma ** 2)).sum()


def log_mixture_prior(w):
    p1 = torch.distributions.Normal(0.0, SIGMA1).log_prob(w).exp()
    p2 = torch.distributions.Normal(0.0, SIGMA2).log_prob(w).exp()
    return torch.log(PI * p1 + (1 - PI) * p2 + 1e-30).sum()


class MixturePriorLinear(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.mu = nn.Parameter(torch.empty(n_out, n_in).uniform_(-0.2, 0.2))
        self.rho = nn.Parameter(torch.empty(n_out, n_in).uniform_(-5, -4))
        self.log_q = self.log_p = 0.0

    def forward(self, x):
        sigma = F.softplus(self.rho)
        w = self.mu + sigma * torch.randn_like(sigma)
        self.log_q = log_gaussian(w, self.mu, sigma)
        self.log_p = log_mixture_prior(w)
        return F.linear(x, w)


class BearingBBB(nn.Module):
    def __init__(self, n_bands=32, hidden=100, n_faults=5):
        super().__init__()
        self.l1 = MixturePriorLinear(n_bands, hidden)
        self.l2 = MixturePriorLinear(hidden, n_faults)

    def forward(self, x):
        return self.l2(F.relu(self.l1(x)))

    def log_q(self):
        return self.l1.log_q + self.l2.log_q

    def log_p(self):
        return self.l1.log_p + self.l2.log_p


def train(features, labels, epochs=30, batch_size=128):
    loader = DataLoader(TensorDataset(features, labels), batch_size=batch_size, shuffle=True)
    num_batches = len(loader)
    net = BearingBBB(n_bands=features.shape[1])
    opt = torch.optim.SGD(net.parameters(), lr=1e-3, momentum=0.9)
    for epoch in range(epochs):
        for xb, yb in loader:
            out = net(xb)
            nll = F.nll_loss(F.log_softmax(out, dim=-1), yb)
            loss = (net.log_q() - net.log_p()) / num_batches + nll
            opt.zero_grad()
            loss.backward()
            opt.step()
    return net


if __name__ == "__main__":
    g = torch.Generator().manual_seed(0)
    y = torch.randint(0, 5, (6_000,), generator=g)
    x = torch.randn(5, 32, generator=g)[y] + torch.randn(6_000, 32, generator=g)
    train(x, y)
