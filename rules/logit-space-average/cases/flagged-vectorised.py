# Pump-bearing MC dropout in one forward call: the input is copied along a sample axis in every usual way.
import torch
import torch.nn.functional as F
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


def expand_splat_vote(model, x, n_samples=10):
    xs = x.unsqueeze(0).expand(n_samples, *x.shape)
    return model(xs).mean(0).argmax(-1)  # expect[logit-space-average]


def none_index_probabilities(model, x, n_samples=10):
    logits = model(x[None].expand(n_samples, -1, -1))
    return F.softmax(logits.mean(0), dim=-1)  # expect[logit-space-average]


def implicit_axis_probabilities(model, x, n_samples=10):
    logits = model(x.expand(n_samples, *x.size()))
    return F.softmax(logits.mean(0), dim=-1)  # expect[logit-space-average]


def stacked_copies_probabilities(model, x, n_samples=10):
    logits = model(torch.stack([x] * n_samples))
    return F.softmax(logits.mean(0), dim=-1)  # expect[logit-space-average]


def comprehension_copies_probabilities(model, x, n_samples=10):
    copies = torch.stack([x for _ in range(n_samples)])
    return F.softmax(model(copies).mean(0), dim=-1)  # expect[logit-space-average]


def tiled_probabilities(model, x, n_samples=10):
    logits = model(x.unsqueeze(0).tile((n_samples, 1, 1)))
    return F.softmax(logits.mean(0), dim=-1)  # expect[logit-space-average]


def expand_as_probabilities(model, x, n_samples=10):
    template = torch.empty(n_samples, *x.shape)
    logits = model(x.unsqueeze(0).expand_as(template))
    return F.softmax(logits.mean(0), dim=-1)  # expect[logit-space-average]


def folded_expand_probabilities(model, x, n_samples=10):
    batch = x.shape[0]
    flat = x.unsqueeze(0).expand(n_samples, -1, -1).reshape(n_samples * batch, -1)
    logits = model(flat).view(n_samples, batch, -1)
    return F.softmax(logits.mean(0), dim=-1)  # expect[logit-space-average]


def unflatten_probabilities(model, x, n_samples=10):
    logits = model(x.repeat(n_samples, 1)).unflatten(0, (n_samples, x.shape[0]))
    return F.softmax(logits.mean(0), dim=-1)  # expect[logit-space-average]


def interleaved_vote(model, x, n_samples=10):
    batch = x.shape[0]
    logits = model(x.repeat_interleave(n_samples, dim=0)).view(batch, n_samples, -1)
    return logits.mean(1).argmax(-1)  # expect[logit-space-average]


def second_axis_probabilities(model, x, n_samples=10):
    logits = model(x.unsqueeze(1).repeat(1, n_samples, 1))
    return F.softmax(logits.mean(1), dim=-1)  # expect[logit-space-average]
