# River-stage forecaster: the KL-like term written many ways (closed form, per-layer sums, log q - log p, a forward
# that returns the KL), each added at full weight to a per-example mean.
import torch
import torch.nn.functional as F
from torch import nn
from torch.distributions import Normal
from torch.utils.data import DataLoader, TensorDataset


def gaussian_kl(mu_q, sigma_q, sigma_p):
    """KL(N(mu_q, sigma_q^2) || N(0, sigma_p^2)), summed over all weights."""
    return (torch.log(sigma_p / sigma_q) + (sigma_q ** 2 + mu_q ** 2) / (2 * sigma_p ** 2) - 0.5).sum()


class GaugeLayer(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.mu = nn.Parameter(torch.zeros(n_out, n_in))
        self.rho = nn.Parameter(torch.full((n_out, n_in), -4.0))
        self.log_q = torch.zeros(())
        self.log_p = torch.zeros(())

    def forward(self, x):
        sigma = F.softplus(self.rho)
        w = self.mu + sigma * torch.randn_like(sigma)
        self.log_q = Normal(self.mu, sigma).log_prob(w).sum()
        self.log_p = Normal(0.0, 1.0).log_prob(w).sum()
        return x @ w.t()

    def kl_loss(self):
        return gaussian_kl(self.mu, F.softplus(self.rho), torch.tensor(1.0))


class StageNet(nn.Module):
    def __init__(self):
        super().__init__()
        self.first = GaugeLayer(24, 16)
        self.second = GaugeLayer(16, 1)

    def forward(self, x):
        h = torch.tanh(self.first(x))
        out = self.second(h)
        kl = self.first.kl_loss() + self.second.kl_loss()
        return out, kl


rain = torch.randn(720, 24)
stage = torch.randn(720, 1)
loader = DataLoader(TensorDataset(rain, stage), batch_size=48, shuffle=True)
net = StageNet()
optimizer = torch.optim.Adam(net.parameters(), lr=1e-3)


def per_layer_sum():
    for x, y in loader:
        pred, _ = net(x)
        kl = sum(m.kl_loss() for m in net.modules() if isinstance(m, GaugeLayer))
        loss = F.mse_loss(pred, y) + kl  # expect[elbo-scale-mismatch]
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def accumulated_over_modules():
    for x, y in loader:
        pred, _ = net(x)
        kl_total = 0.0
        for module in net.modules():
            if hasattr(module, "kl_loss"):
                kl_total += module.kl_loss()
        loss = F.mse_loss(pred, y, reduction="mean") + kl_total  # expect[elbo-scale-mismatch]
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def monte_carlo_kl():
    for x, y in loader:
        pred, _ = net(x)
        log_q = net.first.log_q + net.second.log_q
        log_p = net.first.log_p + net.second.log_p
        loss = F.mse_loss(pred, y) + (log_q - log_p)  # expect[elbo-scale-mismatch]
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def kl_from_forward_with_warm_up(epochs=20, warm_up=5):
    for epoch in range(epochs):
        beta = min(1.0, epoch / warm_up)
        for x, y in loader:
            pred, kl = net(x)
            loss = F.mse_loss(pred, y) + beta * kl  # expect[elbo-scale-mismatch]
            optimizer.zero_grad()
            loss.backward()
            optimizer.step()
