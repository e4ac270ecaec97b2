import torch
import torch.nn as nn

from .layers import RainLinear


class RunoffNet(nn.Module):
    """72 h of hourly rainfall (mm) at 3 rain gauges -> runoff at the outlet (m3/s)."""

    def __init__(self, n_hours=72, n_gauges=3, hidden=40):
        super().__init__()
        self.l1 = RainLinear(n_hours * n_gauges, hidden)
        self.l2 = RainLinear(hidden, hidden)
        self.l3 = RainLinear(hidden, 1)
        self.obs_sigma = nn.Parameter(torch.tensor(0.3))

    def forward(self, rain):
        h = torch.relu(self.l1(rain.flatten(1)))
        h = torch.relu(self.l2(h))
        return self.l3(h).squeeze(-1)

    def kl(self):
        return sum(layer.kl() for layer in (self.l1, self.l2, self.l3))

    def neg_elbo(self, rain, runoff, n_train):
        pred = self(rain)
        log_lik = torch.distributions.Normal(pred, self.obs_sigma).log_prob(runoff)
        return -log_lik.mean() + self.kl() / n_train


def fit(model, loader, epochs=50, lr=2e-3):
    opt = torch.optim.Adam(model.parameters(), lr=lr)
    n_train = len(loader.dataset)
    for epoch in range(epochs):
        for rain, runoff in loader:
            loss = model.neg_elbo(rain, runoff, n_train)
            opt.zero_grad()
            loss.backward()
            opt.step()
    return model
