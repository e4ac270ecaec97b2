# Pump-bearing MC dropout with the sample axis made by einops: one new axis of n_samples copies of the input.
import einops
import torch
import torch.nn.functional as F
from einops import repeat
from torch import nn


class BearingMLP(nn.Module):
    """Band energies -> fault logits; dropout stays on at prediction time (MC dropout)."""

    def __init__(self, n_bands=16, hidden=32, n_faults=5, p_drop=0.3):
        super().__init__()
        self.fc = nn.Linear(n_bands, hidden)
        self.head = nn.Linear(hidden, n_faults)
        self.p_drop = p_drop

    def forward(self, x):
        return self.head(F.dropout(torch.relu(self.fc(x)), self.p_drop, training=True))


def einops_probabilities(model, x, n_samples=10):
    logits = model(einops.repeat(x, "b d -> t b d", t=n_samples))
    return F.softmax(logits.mean(0), dim=-1)  # expect[logit-space-average]


def einops_second_axis_vote(model, x, n_samples=10):
    logits = model(repeat(x, "b d -> b s d", s=n_samples))
    return logits.mean(1).argmax(-1)  # expect[logit-space-average]


def einops_folded_probabilities(model, x, n_samples=10):
    batch = x.shape[0]
    logits = model(repeat(x, "b d -> (t b) d", t=n_samples)).view(n_samples, batch, -1)
    return F.softmax(logits.mean(0), dim=-1)  # expect[logit-space-average]
