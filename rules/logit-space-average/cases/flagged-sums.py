# Pump-bearing fault classifier: dropout passes summed and divided by their count, while still logits.
import numpy as np
import scipy.special
import torch
import torch.nn.functional as F
from torch import nn


class BearingMLP(nn.Module):
    def __init__(self, n_bands=16, n_faults=4, p_drop=0.25):
        super().__init__()
        self.layers = nn.Sequential(
            nn.Linear(n_bands, 24),
            nn.Tanh(),
            nn.Dropout(p_drop),
            nn.Linear(24, n_faults),
            nn.Dropout(0.0),
        )

    def forward(self, x):
        return self.layers(x)


def probabilities_from_list(model, x, n_samples=8):
    outs = [model(x) for _ in range(n_samples)]
    return F.softmax(sum(outs) / n_samples, dim=-1)  # expect[logit-space-average]


def probabilities_from_generator(model, x, n_samples=8):
    return F.softmax(sum(model(x) for _ in range(n_samples)) / n_samples, dim=-1)  # expect[logit-space-average]


def probabilities_from_stack_sum(model, x, n_samples=8):
    stacked = torch.stack([model(x) for _ in range(n_samples)], dim=1)
    return F.softmax(stacked.sum(1) / n_samples, dim=-1)  # expect[logit-space-average]


def vote_from_running_sum(model: BearingMLP, x, n_samples=8):
    total = torch.zeros(x.shape[0], 4)
    for _ in range(n_samples):
        total += model(x)
    return (total / n_samples).argmax(dim=-1)  # expect[logit-space-average]


def vote_from_running_mean(model: BearingMLP, x, n_samples=8):
    running = 0.0
    for _ in range(n_samples):
        running += model(x) / n_samples  # expect[logit-space-average]
    return running.argmax(dim=-1)


def probabilities_in_place(model, x, n_samples=8):
    acc = torch.zeros(x.shape[0], 4)
    for _ in range(n_samples):
        acc = acc + model(x)
    acc /= n_samples  # expect[logit-space-average]
    return torch.softmax(acc, dim=-1)


def probabilities_numpy(model, x, n_samples=8):
    with torch.no_grad():
        draws = np.stack([model(x).numpy() for _ in range(n_samples)])
    return scipy.special.softmax(np.mean(draws, axis=0), axis=-1)  # expect[logit-space-average]
