# A river-stage regression net and a pump-bearing classifier, both with dropout on at prediction time.
import torch
import torch.nn.functional as F
from torch import nn


class StageNet(nn.Module):
    """Rainfall window -> river stage in metres (a regression output)."""

    def __init__(self, n_lags=24, hidden=32):
        super().__init__()
        self.fc = nn.Linear(n_lags, hidden)
        self.out = nn.Linear(hidden, 1)

    def forward(self, rain):
        return self.out(F.dropout(torch.relu(self.fc(rain)), 0.1, training=True))


class BearingNet(nn.Module):
    """Band energies -> fault logits."""

    def __init__(self, n_bands=16, n_faults=5):
        super().__init__()
        self.fc = nn.Linear(n_bands, 32)
        self.head = nn.Linear(32, n_faults)

    def forward(self, x):
        return self.head(F.dropout(torch.relu(self.fc(x)), 0.3, training=True))
