import torch
import torch.nn.functional as F
from torch import nn


class PumpFaultNet(nn.Module):
    def __init__(self, n_bands=16, n_faults=5):
        super().__init__()
        self.body = nn.Sequential(nn.Linear(n_bands, 32), nn.ReLU(), nn.Dropout(0.3))
        self.head = nn.Linear(32, n_faults)

    def forward(self, x):
        return self.head(self.body(x))


def mc_probabilities(model, x, n_samples=20):
    logits = torch.stack([model(x) for _ in range(n_samples)])
    return F.softmax(logits.mean(dim=0), dim=-1)


def mc_probabilities_classes_first(model, x, n_samples=20):
    logits = torch.stack([model(x) for _ in range(n_samples)])
    return logits.mean(0).softmax(1)


def mc_probabilities_from_sum(model, x, n_samples=20):
    outs = [model(x) for _ in range(n_samples)]
    return F.softmax(sum(outs) / n_samples, dim=-1)


def mc_probabilities_from_generator(model, x, n_samples=20):
    return torch.softmax(sum(model(x) for _ in range(n_samples)) / n_samples, dim=1)
