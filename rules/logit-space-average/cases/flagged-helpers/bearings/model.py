# The pump-bearing fault classifier: dropout stays on at prediction time, the head is a linear layer (logits).
import torch
import torch.nn.functional as F
from torch import nn


class BearingFaultNet(nn.Module):
    """Band energies of a vibration spectrum -> logits over five bearing states."""

    def __init__(self, n_bands=16, hidden=32, n_faults=5, p_drop=0.3):
        super().__init__()
        self.fc = nn.Linear(n_bands, hidden)
        self.head = nn.Linear(hidden, n_faults)
        self.p_drop = p_drop

    def forward(self, x):
        return self.head(F.dropout(torch.relu(self.fc(x)), self.p_drop, training=True))
