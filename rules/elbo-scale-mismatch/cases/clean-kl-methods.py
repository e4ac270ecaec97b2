# Look-alikes of KL methods around the river-stage forecaster: composite KL methods scaled correctly, composite
# penalties that are not divergences, latent-code KLs computed from the data (also through loops and names), and
# composite KLs that are only monitored.
import math

import torch
import torch.nn.functional as F
from torch import nn
from torch.utils.data import DataLoader, TensorDataset


class RainfallBayesLinear(nn.Module):
    def __init__(self, n_in, n_out, prior_sd=1.0):
        super().__init__()
        self.w_mu = nn.Parameter(torch.empty(n_out, n_in).uniform_(-0.1, 0.1))
        self.w_rho = nn.Parameter(torch.full((n_out, n_in), -4.0))
        self.b_mu = nn.Parameter(torch.zeros(n_out))
        self.b_rho = nn.Parameter(torch.full((n_out,), -4.0))
        self.prior_sd = prior_sd

    def forward(self, x):
        w = self.w_mu + F.softplus(self.w_rho) * torch.randn_like(self.w_mu)
        b = self.b_mu + F.softplus(self.b_rho) * torch.randn_like(self.b_mu)
        return F.linear(x, w, b)

    def kl(self):
        total = 0.0
        for mu, rho in ((self.w_mu, self.w_rho), (self.b_mu, self.b_rho)):
            sd = F.softplus(rho)
            total = total + (math.log(self.prior_sd) - torch.log(sd) + (sd ** 2 + mu ** 2) / (2 * self.prior_sd ** 2) - 0.5).sum()
        return total


class GaugeForecaster(nn.Module):
    def __init__(self, n_lags=24, n_hidden=16):
        super().__init__()
        self.body = RainfallBayesLinear(n_lags, n_hidden)
        self.head = RainfallBayesLinear(n_hidden, 1)

    def forward(self, x):
        return self.head(torch.tanh(self.body(x))).squeeze(-1)

    def kl(self):
        return self.body.kl() + self.head.kl()


class PenalisedLinear(nn.Module):
    """A deterministic layer with a squared-weight penalty (no divergence, no prior)."""

    def __init__(self, n_in, n_out):
        super().__init__()
        self.weight = nn.Parameter(torch.randn(n_out, n_in) * 0.1)

    def forward(self, x):
        return x @ self.weight.t()

    def penalty(self):
        scaled = self.weight / 0.5
        return (scaled ** 2).sum()


class PenalisedNet(nn.Module):
    """Its `kl` is the sum of the layers' squared-weight penalties, named after the KL but not one."""

    def __init__(self):
        super().__init__()
        self.body = PenalisedLinear(24, 8)
        self.head = PenalisedLinear(8, 1)

    def forward(self, x):
        return self.head(torch.relu(self.body(x))).squeeze(-1)

    def kl(self):
        return self.body.penalty() + self.head.penalty()


class TwoEncoderVAE(nn.Module):
    """Latent codes of two rainfall encoders: their KL is per example, computed from the data."""

    def __init__(self, n_lags=24, n_latent=3):
        super().__init__()
        self.short = nn.Linear(n_lags, 2 * n_latent)
        self.long = nn.Linear(n_lags, 2 * n_latent)
        self.decoder = nn.Linear(2 * n_latent, n_lags)

    def forward(self, x):
        codes = []
        for encoder in (self.short, self.long):
            mu, log_var = encoder(x).chunk(2, dim=-1)
            codes.append(mu + torch.exp(0.5 * log_var) * torch.randn_like(mu))
        return self.decoder(torch.cat(codes, dim=-1))

    def latent_kl(self, x):
        per_example = 0.0
        for mu, log_var in (self.short(x).chunk(2, dim=-1), self.long(x).chunk(2, dim=-1)):
            var = log_var.exp()
            per_example = per_example - 0.5 * (1 + log_var - mu ** 2 - var).sum(dim=1)
        return per_example


rain = torch.rand(960, 24) ** 4 * 10.0
stage = 0.5 + 0.03 * rain.sum(1) + 0.05 * torch.randn(960)
loader = DataLoader(TensorDataset(rain, stage), batch_size=48, shuffle=True)


def composite_kl_per_example(epochs=2):
    model = GaugeForecaster()
    opt = torch.optim.Adam(model.parameters(), lr=1e-3)
    for _ in range(epochs):
        for xb, yb in loader:
            loss = F.mse_loss(model(xb), yb) + model.kl() / len(loader.dataset)
            opt.zero_grad()
            loss.backward()
            opt.step()


def composite_kl_per_batch(epochs=2):
    model = GaugeForecaster()
    opt = torch.optim.Adam(model.parameters(), lr=1e-3)
    for _ in range(epochs):
        for xb, yb in loader:
            loss = F.mse_loss(model(xb), yb, reduction="sum") + model.kl() / len(loader)
            opt.zero_grad()
            loss.backward()
            opt.step()


def composite_penalty_named_kl(epochs=2, decay=1e-4):
    net = PenalisedNet()
    opt = torch.optim.Adam(net.parameters(), lr=1e-3)
    for _ in range(epochs):
        for xb, yb in loader:
            loss = F.mse_loss(net(xb), yb) + decay * net.kl()
            opt.zero_grad()
            loss.backward()
            opt.step()


def latent_kl_from_the_data(epochs=2):
    vae = TwoEncoderVAE()
    opt = torch.optim.Adam(vae.parameters(), lr=1e-3)
    for _ in range(epochs):
        for xb, _ in loader:
            recon = F.mse_loss(vae(xb), xb, reduction="none").sum(dim=1)
            loss = (recon + vae.latent_kl(xb)).mean()
            opt.zero_grad()
            loss.backward()
            opt.step()


def composite_kl_only_monitored(history, epochs=2):
    model = GaugeForecaster()
    opt = torch.optim.Adam(model.parameters(), lr=1e-3)
    for _ in range(epochs):
        for xb, yb in loader:
            nll = F.mse_loss(model(xb), yb)
            history.append({"neg_elbo": (nll + model.kl()).item()})
            opt.zero_grad()
            nll.backward()
            opt.step()
