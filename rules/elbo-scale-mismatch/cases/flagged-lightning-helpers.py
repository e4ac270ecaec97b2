# Multi-station stage forecaster in Lightning: the training step hands its minibatch to helpers, and the KL comes
# from a submodule's closed form written through intermediate names.
import lightning.pytorch as pl
import torch
import torch.nn.functional as F
from torch import nn


class BayesStageHead(nn.Module):
    def __init__(self, n_in, n_out, prior_sd=0.5):
        super().__init__()
        self.w_mu = nn.Parameter(torch.zeros(n_out, n_in))
        self.w_log_sd = nn.Parameter(torch.full((n_out, n_in), -4.0))
        self.prior_sd = prior_sd

    def forward(self, h):
        return F.linear(h, self.w_mu + self.w_log_sd.exp() * torch.randn_like(self.w_mu))

    def kl_divergence(self):
        var_ratio = (self.w_log_sd.exp() / self.prior_sd) ** 2
        shift = (self.w_mu / self.prior_sd) ** 2
        return 0.5 * (var_ratio + shift - 1 - var_ratio.log()).sum()


class StageForecaster(pl.LightningModule):
    def __init__(self, n_stations=3, hidden=64):
        super().__init__()
        self.encoder = nn.GRU(input_size=n_stations, hidden_size=hidden, batch_first=True)
        self.head = BayesStageHead(hidden, n_stations)

    def forward(self, rain):
        _, h = self.encoder(rain)
        return self.head(h[-1])

    def negative_elbo(self, rain, stage):
        nll = F.mse_loss(self(rain), stage)
        return nll + self.head.kl_divergence() / rain.size(0)  # expect[elbo-scale-mismatch]

    def training_step(self, batch, batch_idx):
        rain, stage = batch
        loss = self.negative_elbo(rain, stage)
        self.log("train/loss", loss)
        return loss

    def configure_optimizers(self):
        return torch.optim.Adam(self.parameters(), lr=1e-3)


class DictBatchForecaster(StageForecaster):
    def training_step(self, batch, batch_idx):
        pred = self(batch["rain"])
        nll = F.mse_loss(pred, batch["stage"], reduction="sum")
        return {"loss": nll + self.head.kl_divergence()}  # expect[elbo-scale-mismatch]
