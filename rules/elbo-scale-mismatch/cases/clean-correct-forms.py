# River-stage regression trained with every correct weighting of the minibatch ELBO (and constant factors on top).
import torch
import torch.nn.functional as F
from torch import nn
from torch.distributions import Normal, kl_divergence
from torch.utils.data import DataLoader, TensorDataset

N_TRAIN = 480
KL_TEMPERATURE = 0.02  # tempered objective: the KL is down-weighted on purpose (cold-posterior run, see lab notes)


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
        return kl_divergence(q, Normal(0.0, 1.0)).sum()


rain = torch.randn(N_TRAIN, 24)
stage = torch.randn(N_TRAIN, 1)
gauge_loader = DataLoader(TensorDataset(rain, stage), batch_size=32, shuffle=True)
model = StageBayesLinear(24, 1)
optimizer = torch.optim.Adam(model.parameters(), lr=1e-2)


def form_a_scaled_sum():
    n_train = len(gauge_loader.dataset)
    for xb, yb in gauge_loader:
        loss = n_train / xb.shape[0] * F.mse_loss(model(xb), yb, reduction="sum") + model.kl()
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def form_b_sum_and_kl_per_batch():
    for xb, yb in gauge_loader:
        loss = F.mse_loss(model(xb), yb, reduction="sum") + model.kl() / len(gauge_loader)
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def form_b_blundell_weights():
    num_batches = len(gauge_loader)
    for i, (xb, yb) in enumerate(gauge_loader):
        pi = 2 ** (num_batches - i - 1) / (2 ** num_batches - 1)
        loss = F.mse_loss(model(xb), yb, reduction="sum") + pi * model.kl()
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def form_c_mean_and_kl_per_example():
    for xb, yb in gauge_loader:
        loss = F.mse_loss(model(xb), yb) + model.kl() / len(gauge_loader.dataset)
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def form_c_beta_from_dataset_size():
    beta = 1.0 / N_TRAIN
    for xb, yb in gauge_loader:
        loss = F.mse_loss(model(xb), yb) + beta * model.kl()
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def form_c_with_warm_up(epochs=10, warm_up=4):
    for epoch in range(epochs):
        kl_weight = min(1.0, (epoch + 1) / warm_up)
        for xb, yb in gauge_loader:
            nll = -Normal(model(xb), 0.1).log_prob(yb).mean()
            loss = nll + kl_weight * model.kl() / N_TRAIN
            optimizer.zero_grad()
            loss.backward()
            optimizer.step()


def form_c_tempered_documented():
    for xb, yb in gauge_loader:
        loss = F.mse_loss(model(xb), yb) + KL_TEMPERATURE * model.kl()
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def form_c_cold_posterior_on_correct_form():
    for xb, yb in gauge_loader:
        loss = F.mse_loss(model(xb), yb) + 0.1 * model.kl() / N_TRAIN
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def full_batch_summed_objective(steps=200):
    for _ in range(steps):
        loss = F.mse_loss(model(rain), stage, reduction="sum") + model.kl()
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def accumulated_loss_over_examples():
    for xb, yb in gauge_loader:
        loss = F.mse_loss(model(xb), yb)
        loss += model.kl() / N_TRAIN
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()
