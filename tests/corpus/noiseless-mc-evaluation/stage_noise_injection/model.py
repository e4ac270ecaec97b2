"""GRU stage forecaster with noise injection on the hidden state."""
from torch import nn

from .layers import TrainingNoise


class StageGRU(nn.Module):
    def __init__(self, n_stations=3, hidden=48, noise_sd=0.1):
        super().__init__()
        self.gru = nn.GRU(n_stations, hidden, batch_first=True)
        self.noise = TrainingNoise(noise_sd)
        self.head = nn.Linear(hidden, n_stations)

    def forward(self, rain):
        out, _ = self.gru(rain)
        return self.head(self.noise(out[:, -1]))
