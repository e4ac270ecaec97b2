# The pump classifier (same as the flagged case): BatchNorm and dropout.
from torch import nn


class PumpFaultNet(nn.Module):
    def __init__(self, n_bands=32, hidden=64, n_faults=5):
        super().__init__()
        self.trunk = nn.Sequential(nn.Linear(n_bands, hidden), nn.BatchNorm1d(hidden), nn.ReLU(), nn.Dropout(0.3))
        self.head = nn.Linear(hidden, n_faults)

    def forward(self, x):
        return self.head(self.trunk(x))
