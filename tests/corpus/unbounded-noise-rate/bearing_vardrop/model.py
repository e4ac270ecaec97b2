"""Bearing-fault classifier with variational dropout in the hidden layers."""
from torch import nn
import torch.nn.functional as F

from .layers import GaussianDropoutLinear


class BearingVDNet(nn.Module):
    def __init__(self, n_bands=32, hidden=128, n_faults=5):
        super().__init__()
        self.l1 = GaussianDropoutLinear(n_bands, hidden)
        self.l2 = GaussianDropoutLinear(hidden, hidden)
        self.head = nn.Linear(hidden, n_faults)

    def forward(self, x):
        return self.head(F.relu(self.l2(F.relu(self.l1(x)))))

    def kl(self):
        return self.l1.kl() + self.l2.kl()
