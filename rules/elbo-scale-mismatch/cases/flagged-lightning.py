# Pump-bearing classifier as a Lightning module: the KL is divided by the batch size instead of the dataset size.
import pytorch_lightning as pl
import torch
import torch.nn.functional as F
from torch import nn


class BayesBearingModule(pl.LightningModule):
    def __init__(self, n_bands=32, n_states=5, batch_size=64):
        super().__init__()
        self.save_hyperparameters()
        self.w_mu = nn.Parameter(torch.zeros(n_states, n_bands))
        self.w_rho = nn.Parameter(torch.full((n_states, n_bands), -5.0))

    def forward(self, x):
        sigma = F.softplus(self.w_rho)
        return x @ (self.w_mu + sigma * torch.randn_like(sigma)).t()

    def kl(self):
        sigma = F.softplus(self.w_rho)
        return (0.5 * (sigma ** 2 + self.w_mu ** 2) - torch.log(sigma) - 0.5).sum()

    def training_step(self, batch, batch_idx):
        x, y = batch
        nll = F.cross_entropy(self(x), y)
        loss = nll + self.kl() / len(x)  # expect[elbo-scale-mismatch]
        self.log("train/elbo_loss", loss)
        return loss

    def configure_optimizers(self):
        return torch.optim.Adam(self.parameters(), lr=1e-3)
