"""Lightning module for the multi-station stage forecaster."""
import lightning.pytorch as pl
import torch
from torch import nn

from .bayes_layers import BayesHead


class StageForecaster(pl.LightningModule):
    def __init__(self, n_stations=3, hidden=64, lr=1e-3, n_train=None):
        super().__init__()
        self.save_hyperparameters()
        self.encoder = nn.GRU(input_size=n_stations, hidden_size=hidden, batch_first=True)
        self.head = BayesHead(hidden, n_stations)
        self.criterion = nn.GaussianNLLLoss()

    def forward(self, rain):
        _, h = self.encoder(rain)
        return self.head(h[-1])

    def training_step(self, batch, batch_idx):
        rain, stage = batch
        mu, var = self(rain)
        nll = self.criterion(mu, stage, var)
        kl = self.head.kl_divergence()
        loss = nll + kl / rain.size(0)
        self.log_dict({"train/nll": nll, "train/kl": kl})
        return loss

    def validation_step(self, batch, batch_idx):
        rain, stage = batch
        mu, var = self(rain)
        nll = self.criterion(mu, stage, var)
        self.log("val/neg_elbo", nll + self.head.kl_divergence() / self.hparams.n_train)

    def configure_optimizers(self):
        return torch.optim.Adam(self.parameters(), lr=self.hparams.lr)
