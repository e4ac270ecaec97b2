# Ensemble members (logit heads) and the ensemble container.
import torch
from torch import nn


class BearingClassifier(nn.Module):
    """One member: band energies -> logits over the bearing states."""

    def __init__(self, n_bands=12, n_faults=3):
        super().__init__()
        self.net = nn.Sequential(nn.Linear(n_bands, 16), nn.ReLU(), nn.Linear(16, n_faults))

    def forward(self, x):
        return self.net(x)


class BearingEnsemble(nn.Module):
    def __init__(self, n_members=4, n_bands=12, n_faults=3):
        super().__init__()
        self.members = nn.ModuleList([BearingClassifier(n_bands, n_faults) for _ in range(n_members)])

    def forward(self, x):
        return torch.stack([m(x) for m in self.members])

    def predict(self, x):
        """The ensemble's class scores for a batch."""
        return torch.stack([member(x) for member in self.members]).mean(0)  # expect[logit-space-average]
