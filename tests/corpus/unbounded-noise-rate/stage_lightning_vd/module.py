"""Lightning module: GRU over multi-station rainfall, variational dropout, linear head."""
import lightning.pytorch as pl
import torch
from torch import nn
import torch.nn.functional as F

from .noise import VariationalDropout


class StageVD(pl.LightningModule):
    def __init__(self, n_stations=3, hidden=64, lr=1e-3, n_train=20_000):
        super().__init__()
        self.save_hyperparameters()
        self.gru = nn.GRU(n_stations, hidden, batch_first=True)
        self.vd = VariationalDropout(hidden)
        self.head = nn.Linear(hidden, n_stations)

    def forward(self, rain):
        out, _ = self.gru(rain)
        return self.head(self.vd(out[:, -1]))

    def training_step(self, batch, batch_idx):
        rain, stage = batch
        loss = F.mse_loss(self(rain), stage) + self.vd.kl() / self.hparams.n_train
        self.log("train/loss", loss)
        self.log("train/alpha_max", self.vd.alpha.max())
        return loss

    def configure_optimizers(self):
        return torch.optim.Adam(self.parameters(), lr=self.hparams.lr)
