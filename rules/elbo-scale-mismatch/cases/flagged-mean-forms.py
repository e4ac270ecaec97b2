# River-stage regression with a Bayes-by-backprop layer: mean-reduced data terms paired with a wrongly scaled KL.
import torch
import torch.nn.functional as F
from torch import nn
from torch.distributions import Normal, kl_divergence
from torch.utils.data import DataLoader, TensorDataset


class StageBayesLinear(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.w_mu = nn.Parameter(torch.zeros(n_out, n_in))
        self.w_rho = nn.Parameter(torch.full((n_out, n_in), -5.0))

    def forward(self, rain):
        w = self.w_mu + F.softplus(self.w_rho) * torch.randn_like(self.w_mu)
        return rain @ w.t()

    def kl(self):
        q = Normal(self.w_mu, F.softplus(self.w_rho))
        p = Normal(torch.zeros_like(self.w_mu), torch.ones_like(self.w_mu))
        return kl_divergence(q, p).sum()

    def kl_per_weight(self):
        q = Normal(self.w_mu, F.softplus(self.w_rho))
        p = Normal(torch.zeros_like(self.w_mu), torch.ones_like(self.w_mu))
        return kl_divergence(q, p).mean()


rain = torch.randn(480, 24)
stage = torch.randn(480, 1)
gauge_loader = DataLoader(TensorDataset(rain, stage), batch_size=32, shuffle=True)
n_train = len(gauge_loader.dataset)
model = StageBayesLinear(24, 1)
optimizer = torch.optim.Adam(model.parameters(), lr=1e-2)


def mean_plus_full_kl():
    for xb, yb in gauge_loader:
        loss = F.mse_loss(model(xb), yb) + model.kl()  # expect[elbo-scale-mismatch]
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def mean_plus_kl_over_batch():
    for xb, yb in gauge_loader:
        nll = F.mse_loss(model(xb), yb)
        kl = model.kl() / xb.size(0)
        loss = nll + kl  # expect[elbo-scale-mismatch]
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def mean_plus_kl_over_batches():
    num_batches = len(gauge_loader)
    for xb, yb in gauge_loader:
        loss = F.mse_loss(model(xb), yb)
        loss = loss + model.kl() / num_batches  # expect[elbo-scale-mismatch]
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def mean_plus_kl_averaged_over_weights():
    for xb, yb in gauge_loader:
        loss = F.mse_loss(model(xb), yb) + model.kl_per_weight() / n_train  # expect[elbo-scale-mismatch]
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()
