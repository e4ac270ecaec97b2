"""AMBIGUOUS: VAE of leaf spectra with summed reconstruction and summed *per-example* latent KL.

The KL here is over per-example latent codes (local variables), not over the weights, so
sum(recon) + sum(KL over the batch) is the correct minibatch ELBO up to the factor N/B applied
to both terms. RULES.md's "batch sum without N/B or B/N" clause would fire on it literally; the
contract does not say how to tell a local-latent KL from a global weight KL.
"""
import torch
from torch import nn
import torch.nn.functional as F


class SpectrumVAE(nn.Module):
    def __init__(self, n_bands=120, z_dim=8):
        super().__init__()
        self.enc = nn.Sequential(nn.Linear(n_bands, 64), nn.ReLU(), nn.Linear(64, 2 * z_dim))
        self.dec = nn.Sequential(nn.Linear(z_dim, 64), nn.ReLU(), nn.Linear(64, n_bands), nn.Sigmoid())

    def forward(self, x):
        mu, logvar = self.enc(x).chunk(2, dim=-1)
        z = mu + torch.exp(0.5 * logvar) * torch.randn_like(mu)
        return self.dec(z), mu, logvar


def vae_loss(recon, x, mu, logvar):
    bce = F.binary_cross_entropy(recon, x, reduction="sum")
    kld = -0.5 * torch.sum(1 + logvar - mu.pow(2) - logvar.exp())
    return bce + kld


def train(model, loader, epochs=30):
    opt = torch.optim.Adam(model.parameters(), lr=1e-3)
    for epoch in range(epochs):
        for (x,) in loader:
            recon, mu, logvar = model(x)
            loss = vae_loss(recon, x, mu, logvar)
            opt.zero_grad()
            loss.backward()
            opt.step()
