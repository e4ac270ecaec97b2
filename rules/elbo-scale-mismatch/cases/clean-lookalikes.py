# Look-alikes around the pump-bearing classifier: KL terms that are not a KL to the prior, or are never optimised.
import torch
import torch.nn.functional as F
from torch import nn
from torch.distributions import Categorical, Normal, kl_divergence
from torch.utils.data import DataLoader, TensorDataset


class BearingNet(nn.Module):
    def __init__(self, n_bands=32, n_states=5):
        super().__init__()
        self.w_mu = nn.Parameter(torch.zeros(n_states, n_bands))
        self.w_rho = nn.Parameter(torch.full((n_states, n_bands), -5.0))

    def forward(self, x):
        sigma = F.softplus(self.w_rho)
        return x @ (self.w_mu + sigma * torch.randn_like(sigma)).t()

    def kl(self):
        return kl_divergence(Normal(self.w_mu, F.softplus(self.w_rho)), Normal(0.0, 1.0)).sum()


class SpectralNormPenalty(nn.Module):
    """A deterministic head whose `kl` is a spectral-norm penalty, not a divergence."""

    def __init__(self, n_bands=32, n_states=5):
        super().__init__()
        self.weight = nn.Parameter(torch.randn(n_states, n_bands) * 0.1)

    def forward(self, x):
        return x @ self.weight.t()

    def kl(self):
        return torch.linalg.matrix_norm(self.weight, ord=2)


class VibrationVAE(nn.Module):
    def __init__(self, n_bands=32, n_latent=4):
        super().__init__()
        self.encoder = nn.Linear(n_bands, 2 * n_latent)
        self.decoder = nn.Linear(n_latent, n_bands)

    def forward(self, x):
        mu, log_var = self.encoder(x).chunk(2, dim=-1)
        z = mu + torch.exp(0.5 * log_var) * torch.randn_like(mu)
        return torch.sigmoid(self.decoder(z)), mu, log_var


bands = torch.rand(1_000, 32)
states = torch.randint(0, 5, (1_000,))
loader = DataLoader(TensorDataset(bands, states), batch_size=50, shuffle=True)
student = BearingNet()
teacher = BearingNet()
penalised = SpectralNormPenalty()
vae = VibrationVAE()
optimizer = torch.optim.Adam(list(student.parameters()) + list(penalised.parameters()) + list(vae.parameters()), lr=1e-3)


def distillation(temperature=2.0):
    for x, y in loader:
        with torch.no_grad():
            soft_targets = F.softmax(teacher(x) / temperature, dim=-1)
        logits = student(x)
        distill = F.kl_div(F.log_softmax(logits / temperature, dim=-1), soft_targets, reduction="batchmean")
        loss = F.cross_entropy(logits, y) + distill
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def output_divergence():
    for x, y in loader:
        logits = student(x)
        agreement = kl_divergence(Categorical(logits=logits), Categorical(logits=teacher(x).detach())).mean()
        loss = F.cross_entropy(logits, y) + agreement
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def named_kl_that_is_a_norm_penalty():
    for x, y in loader:
        loss = F.cross_entropy(penalised(x), y) + penalised.kl()
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def vae_with_local_kl():
    for x, _ in loader:
        recon, mu, log_var = vae(x)
        recon_loss = F.binary_cross_entropy(recon, x, reduction="sum")
        kld = -0.5 * torch.sum(1 + log_var - mu.pow(2) - log_var.exp())
        (recon_loss + kld).backward()
        optimizer.step()


def kl_only_logged(history):
    for x, y in loader:
        loss = F.cross_entropy(student(x), y)
        kl = student.kl()
        history.append({"kl": kl.item(), "elbo": -(loss + kl).item()})
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def kl_detached_for_monitoring():
    for x, y in loader:
        loss = F.cross_entropy(student(x), y) + student.kl().detach()
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


@torch.no_grad()
def validation_elbo(val_loader):
    total = 0.0
    for x, y in val_loader:
        total += float(F.cross_entropy(student(x), y) + student.kl())
    return total


def weight_decay_penalty(decay=1e-4):
    for x, y in loader:
        l2 = sum((p ** 2).sum() for p in penalised.parameters())
        loss = F.cross_entropy(penalised(x), y) + decay * l2
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()
