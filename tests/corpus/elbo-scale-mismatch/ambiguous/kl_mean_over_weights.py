"""AMBIGUOUS: KL averaged over the weights (.mean()) instead of summed, then divided by N.

SOURCES.md §1.2 lists "KL as .mean() over weights" as a bug (lighter by the number of weights),
but RULES.md's fire conditions only look at the data-term reduction and the N / B divisor, which
are right here.
"""
import torch
from torch import nn
import torch.nn.functional as F


class TinyBayes(nn.Module):
    def __init__(self, n_in=48):
        super().__init__()
        self.mu = nn.Parameter(torch.zeros(1, n_in))
        self.rho = nn.Parameter(torch.full((1, n_in), -4.0))

    def forward(self, x):
        sd = F.softplus(self.rho)
        return F.linear(x, self.mu + sd * torch.randn_like(sd)).squeeze(-1)

    def kl(self):
        sd = F.softplus(self.rho)
        return (-torch.log(sd) + 0.5 * (sd ** 2 + self.mu ** 2) - 0.5).mean()


def train(model, loader, n_train, epochs=30):
    opt = torch.optim.Adam(model.parameters(), lr=1e-3)
    for epoch in range(epochs):
        for x, y in loader:
            loss = F.mse_loss(model(x), y) + model.kl() / n_train
            opt.zero_grad()
            loss.backward()
            opt.step()
