"""The lab's two PyTorch models: river-stage forecaster and pump-bearing fault classifier."""
import torch
from torch import nn
import torch.nn.functional as F
from torch.distributions import Normal, kl_divergence

from .layers import AdaptiveGaussianDropout, BayesLinear, GaussianWeightLayer


class StationHead(GaussianWeightLayer):
    """Per-station output layer: one stage forecast (m) per gauging station."""

    def __init__(self, in_features, n_stations, prior_std=1.0):
        super().__init__(in_features, n_stations)
        self.prior_std = prior_std

    def forward(self, h):
        eps = torch.randn_like(self.weight_mu)
        w = self.weight_mu + self.weight_std * eps
        return F.linear(h, w, self.bias)

    def kl(self):
        q = Normal(self.weight_mu, self.weight_std)
        p = Normal(torch.zeros_like(self.weight_mu), self.prior_std * torch.ones_like(self.weight_mu))
        return kl_divergence(q, p).sum()


class RiverStageForecaster(nn.Module):
    """Rainfall window (mm/h over the last hours) -> stage 6 h ahead at every station."""

    def __init__(self, window_hours=24, hidden=64, n_stations=6, prior_std=1.0):
        super().__init__()
        self.trunk1 = BayesLinear(window_hours, hidden, prior_std)
        self.trunk2 = BayesLinear(hidden, hidden, prior_std)
        self.head = StationHead(hidden, n_stations, prior_std)
        # observation noise of the gauges, stored as a log: exp(-1.6) ~ 0.20 m
        self.log_obs_noise = nn.Parameter(torch.full((n_stations,), -1.6))

    def forward(self, rain):
        h = F.gelu(self.trunk1(rain))
        h = F.gelu(self.trunk2(h))
        return self.head(h)

    def obs_std(self):
        return self.log_obs_noise.exp()

    def kl(self):
        return self.trunk1.kl() + self.trunk2.kl() + self.head.kl()


class PumpBearingClassifier(nn.Module):
    """Band energies of a vibration spectrum -> logits over 5 bearing states."""

    def __init__(self, n_bands=32, hidden=128, n_classes=5, p_drop=0.3):
        super().__init__()
        self.band_noise = AdaptiveGaussianDropout(n_bands)
        self.body = nn.Sequential(
            nn.Linear(n_bands, hidden),
            nn.BatchNorm1d(hidden),
            nn.ReLU(),
            nn.Dropout(p_drop),
            nn.Linear(hidden, hidden // 2),
            nn.BatchNorm1d(hidden // 2),
            nn.ReLU(),
            nn.Dropout(p_drop),
        )
        self.classifier = nn.Linear(hidden // 2, n_classes)

    def forward(self, x):
        return self.classifier(self.body(self.band_noise(x)))
