from torch import nn

from .encoder import SpectralEncoder


class FaultModel(nn.Module):
    def __init__(self, n_freq=64, n_faults=5):
        super().__init__()
        self.encoder = SpectralEncoder(n_freq)
        self.head = nn.Linear(32, n_faults)

    def forward(self, spec):
        return self.head(self.encoder(spec))
