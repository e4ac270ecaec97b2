# The pump-bearing fault classifier: BatchNorm for the band energies, dropout before the head.
import torch
from torch import nn


class BandDropout(nn.Module):
    """Drops whole frequency bands while training; the identity in eval mode."""

    def __init__(self, p=0.1):
        super().__init__()
        self.p = p

    def forward(self, x):
        if not self.training:
            return x
        keep = torch.bernoulli(torch.full_like(x, 1 - self.p))
        return x * keep / (1 - self.p)


class PumpFaultNet(nn.Module):
    def __init__(self, n_bands=32, hidden=128, n_faults=5, p_drop=0.3):
        super().__init__()
        self.band_drop = BandDropout(0.1)
        self.trunk = nn.Sequential(
            nn.Linear(n_bands, hidden),
            nn.BatchNorm1d(hidden),
            nn.ReLU(),
            nn.Dropout(p_drop),
        )
        self.head = nn.Linear(hidden, n_faults)

    def forward(self, x):
        return self.head(self.trunk(self.band_drop(x)))
