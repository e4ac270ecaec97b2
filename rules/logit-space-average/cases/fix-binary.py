import torch
import torch.nn.functional as F
from torch import nn


class FaultDetector(nn.Module):
    def __init__(self, n_bands=12):
        super().__init__()
        self.features = nn.Sequential(nn.Linear(n_bands, 16), nn.ReLU(), nn.Dropout(0.3))
        self.logit = nn.Linear(16, 1)

    def forward(self, x):
        return self.logit(self.features(x)).squeeze(-1)


def fault_probability(detector, x, n_passes=16):
    draws = torch.stack([detector(x) for _ in range(n_passes)])
    return torch.sigmoid(draws.mean(0))


def detection_loss(detector, x, is_faulty, n_passes=16):
    draws = torch.stack([detector(x) for _ in range(n_passes)])
    return F.binary_cross_entropy_with_logits(draws.mean(0), is_faulty)
