"""MC vote of the pump-bearing classifier."""
from __future__ import annotations

import math
import torch
from torch import nn


class PumpFaultNet(nn.Module):
    def __init__(self, n_bands=16, n_faults=5):
        super().__init__()
        self.body = nn.Sequential(nn.Linear(n_bands, 32), nn.ReLU(), nn.Dropout(0.3))
        self.head = nn.Linear(32, n_faults)

    def forward(self, x):
        return self.head(self.body(x))


def mc_vote(model: PumpFaultNet, x, n_samples=20):
    logits = torch.stack([model(x) for _ in range(n_samples)])
    mean_logits = torch.logsumexp(logits.log_softmax(dim=-1), dim=0) - math.log(n_samples)
    return mean_logits.argmax(dim=-1)
