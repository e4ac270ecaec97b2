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
    return F.softmax(logits, dim=-1).mean(dim=0)


def mc_probabilities_classes_first(model, x, n_samples=20):
    logits = torch.stack([model(x) for _ in range(n_samples)])
    return logits.softmax(2).mean(0)


def mc_probabilities_from_sum(model, x, n_samples=20):
    outs = [model(x) for _ in range(n_samples)]
    return F.softmax(torch.stack(outs), dim=-1).mean(dim=0)


def mc_probabilities_from_generator(model, x, n_samples=20):
    return sum(torch.softmax(model(x), dim=1) for _ in range(n_samples)) / n_samples
