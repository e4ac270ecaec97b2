"""Bearing classifier with always-on dropout (Gal-style MC dropout)."""
from torch import nn
import torch.nn.functional as F


class MCBearingClassifier(nn.Module):
    def __init__(self, n_bands=32, n_faults=5, hidden=64, p=0.1):
        super().__init__()
        self.fc1 = nn.Linear(n_bands, hidden)
        self.fc2 = nn.Linear(hidden, n_faults)
        self.p = p

    def forward(self, x):
        h = F.dropout(F.relu(self.fc1(x)), self.p, training=True)
        return self.fc2(h)
