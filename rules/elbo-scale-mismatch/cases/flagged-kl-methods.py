# River-stage forecasters whose KL methods are recognised by what they compute: closed forms over loops and
# intermediate names, sums of submodule KL methods, a log q - log p method, and KL helpers over layer tuples.
import math

import torch
import torch.nn.functional as F
from torch import nn
from torch.distributions import Normal
from torch.utils.data import DataLoader


class RainfallBayesLinear(nn.Module):
    """Weights and biases with a factorised Gaussian posterior; the KL loops over both parameter pairs."""

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


class StageHead(nn.Module):
    """Log-sd parameterisation; the closed form reads its variance ratio through intermediate names."""

    def __init__(self, n_in, prior_sd=0.5):
        super().__init__()
        self.w_mu = nn.Parameter(torch.zeros(1, n_in))
        self.w_log_sd = nn.Parameter(torch.full((1, n_in), -4.0))
        self.prior_sd = prior_sd

    def forward(self, h):
        return F.linear(h, self.w_mu + self.w_log_sd.exp() * torch.randn_like(self.w_mu)).squeeze(-1)

    def kl_divergence(self):
        var_ratio = (self.w_log_sd.exp() / self.prior_sd) ** 2
        shift = (self.w_mu / self.prior_sd) ** 2
        return 0.5 * (var_ratio + shift - 1 - var_ratio.log()).sum()


class GaugeForecaster(nn.Module):
    """The model's KL is the sum of its submodules' KL methods."""

    def __init__(self, n_lags=24, n_hidden=16):
        super().__init__()
        self.body = RainfallBayesLinear(n_lags, n_hidden)
        self.head = StageHead(n_hidden)

    def forward(self, x):
        return self.head(torch.tanh(self.body(x)))

    def kl(self):
        return self.body.kl() + self.head.kl_divergence()


class SampledKlLayer(nn.Module):
    """Monte Carlo KL: the log-density of the sampled weights under the posterior minus under the prior."""

    def __init__(self, n_in):
        super().__init__()
        self.mu = nn.Parameter(torch.zeros(1, n_in))
        self.rho = nn.Parameter(torch.full((1, n_in), -4.0))
        self.prior = Normal(0.0, 1.0)
        self.sampled = torch.zeros(1, n_in)

    def posterior(self):
        return Normal(self.mu, F.softplus(self.rho))

    def forward(self, x):
        self.sampled = self.posterior().rsample()
        return F.linear(x, self.sampled).squeeze(-1)

    def kl(self):
        return self.posterior().log_prob(self.sampled).sum() - self.prior.log_prob(self.sampled).sum()


class TwoStageNet(nn.Module):
    def __init__(self, n_lags=24, n_hidden=8):
        super().__init__()
        self.first = RainfallBayesLinear(n_lags, n_hidden)
        self.second = RainfallBayesLinear(n_hidden, 1)

    def forward(self, x):
        return self.second(torch.relu(self.first(x))).squeeze(-1)


class StackedGauge(nn.Module):
    """The model's KL accumulates its blocks' KL methods over a module list."""

    def __init__(self, widths=(24, 16, 1)):
        super().__init__()
        self.blocks = nn.ModuleList([RainfallBayesLinear(a, b) for a, b in zip(widths[:-1], widths[1:])])

    def forward(self, x):
        for block in self.blocks[:-1]:
            x = torch.relu(block(x))
        return self.blocks[-1](x).squeeze(-1)

    def kl(self):
        total = 0.0
        for block in self.blocks:
            total += block.kl()
        return total


def network_kl(net):
    """The KL of a network as the sum over its layers, listed explicitly."""
    return sum(layer.kl() for layer in (net.first, net.second))


def stacked_kl(net):
    return torch.stack([layer.kl() for layer in (net.first, net.second)]).sum()


rain = torch.rand(960, 24) ** 4 * 10.0
stage = 0.5 + 0.03 * rain.sum(1) + 0.05 * torch.randn(960)
windows = torch.utils.data.TensorDataset(rain, stage)
column_windows = torch.utils.data.TensorDataset(rain, stage[:, None])


def sum_of_submodule_kls(epochs=2):
    loader = DataLoader(windows, batch_size=48, shuffle=True)
    model = GaugeForecaster()
    opt = torch.optim.Adam(model.parameters(), lr=1e-3)
    for _ in range(epochs):
        for xb, yb in loader:
            loss = F.mse_loss(model(xb), yb) + model.kl()  # expect[elbo-scale-mismatch]
            opt.zero_grad()
            loss.backward()
            opt.step()


def layer_kl_called_directly(epochs=2):
    loader = DataLoader(windows, batch_size=64, shuffle=True)
    net = StageHead(24)
    opt = torch.optim.Adam(net.parameters(), lr=1e-3)
    for _ in range(epochs):
        for x, y in loader:
            loss = F.mse_loss(net(x), y) + net.kl_divergence()  # expect[elbo-scale-mismatch]
            opt.zero_grad()
            loss.backward()
            opt.step()


def looped_closed_form_over_batch_size(epochs=2):
    loader = DataLoader(column_windows, batch_size=32, shuffle=True)
    layer = RainfallBayesLinear(24, 1)
    opt = torch.optim.Adam(layer.parameters(), lr=1e-3)
    for _ in range(epochs):
        for x, y in loader:
            loss = F.mse_loss(layer(x), y) + layer.kl() / x.shape[0]  # expect[elbo-scale-mismatch]
            opt.zero_grad()
            loss.backward()
            opt.step()


def sampled_kl_method(epochs=2):
    loader = DataLoader(windows, batch_size=40, shuffle=True)
    net = SampledKlLayer(24)
    opt = torch.optim.Adam(net.parameters(), lr=1e-3)
    for _ in range(epochs):
        for x, y in loader:
            pred = net(x)
            loss = F.mse_loss(pred, y) + net.kl()  # expect[elbo-scale-mismatch]
            opt.zero_grad()
            loss.backward()
            opt.step()


def kl_helper_over_layer_tuple(epochs=2):
    loader = DataLoader(windows, batch_size=60, shuffle=True)
    net = TwoStageNet()
    opt = torch.optim.Adam(net.parameters(), lr=1e-3)
    for _ in range(epochs):
        for x, y in loader:
            loss = F.mse_loss(net(x), y, reduction="sum") + network_kl(net)  # expect[elbo-scale-mismatch]
            opt.zero_grad()
            loss.backward()
            opt.step()


def stacked_layer_kls(epochs=2):
    loader = DataLoader(windows, batch_size=60, shuffle=True)
    net = TwoStageNet()
    opt = torch.optim.Adam(net.parameters(), lr=1e-3)
    for _ in range(epochs):
        for x, y in loader:
            loss = F.mse_loss(net(x), y) + stacked_kl(net) / len(loader)  # expect[elbo-scale-mismatch]
            opt.zero_grad()
            loss.backward()
            opt.step()


def accumulated_block_kls(epochs=2):
    loader = DataLoader(windows, batch_size=80, shuffle=True)
    model = StackedGauge()
    opt = torch.optim.Adam(model.parameters(), lr=1e-3)
    for _ in range(epochs):
        for x, y in loader:
            loss = F.mse_loss(model(x), y) + model.kl() / len(x)  # expect[elbo-scale-mismatch]
            opt.zero_grad()
            loss.backward()
            opt.step()
