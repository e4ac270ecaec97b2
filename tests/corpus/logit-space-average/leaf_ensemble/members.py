"""Deep ensemble of small MLPs on leaf reflectance spectra (120 bands, 4 stress classes)."""
import torch
from torch import nn


class SpectrumMLP(nn.Module):
    def __init__(self, n_bands=120, n_classes=4, hidden=96):
        super().__init__()
        self.net = nn.Sequential(
            nn.Linear(n_bands, hidden), nn.GELU(),
            nn.Linear(hidden, hidden), nn.GELU(),
            nn.Linear(hidden, n_classes),
        )

    def forward(self, spectra):
        return self.net(spectra)


def build_ensemble(n_members=5, **kw):
    members = nn.ModuleList()
    for seed in range(n_members):
        torch.manual_seed(1000 + seed)
        members.append(SpectrumMLP(**kw))
    return members
