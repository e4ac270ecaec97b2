"""Spectral encoder for vibration spectrograms (channel dropout between conv blocks)."""
from torch import nn


class SpectralEncoder(nn.Module):
    def __init__(self, n_freq=64, width=32, p=0.2):
        super().__init__()
        self.blocks = nn.Sequential(
            nn.Conv1d(n_freq, width, 3, padding=1), nn.GELU(), nn.Dropout1d(p),
            nn.Conv1d(width, width, 3, padding=1), nn.GELU(), nn.Dropout1d(p),
        )

    def forward(self, spec):
        return self.blocks(spec).mean(-1)
