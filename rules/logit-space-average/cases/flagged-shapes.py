# Pump-bearing classifier: more ways MC passes are collected (preallocated tensors, per-batch loops, factories, methods).
import numpy as np
import torch
import torch.nn.functional as F
from torch import nn


def build_classifier(n_bands=16, n_faults=4):
    net = nn.Sequential(nn.Linear(n_bands, 32), nn.ReLU(), nn.Dropout(0.3), nn.Linear(32, n_faults))
    return net


class SelfSamplingNet(nn.Module):
    """Dropout stays on at prediction time (functional dropout with training=True)."""

    def __init__(self, n_bands=16, n_faults=4):
        super().__init__()
        self.fc1 = nn.Linear(n_bands, 32)
        self.fc2 = nn.Linear(32, n_faults)
        self.criterion = nn.CrossEntropyLoss()

    def forward(self, x):
        return self.fc2(F.dropout(torch.relu(self.fc1(x)), 0.3, training=True))

    def training_loss(self, x, y):
        return self.criterion(self(x), y)

    def predict(self, x, n_samples=10):
        return torch.stack([self(x) for _ in range(n_samples)]).mean(0)  # expect[logit-space-average]


def filled_vote(model: SelfSamplingNet, x, n_samples=10):
    scores = torch.zeros(n_samples, x.shape[0], 4)
    for t in range(n_samples):
        scores[t] = model(x)
    return scores.mean(0).argmax(1)  # expect[logit-space-average]


def correct_over_batches(model: SelfSamplingNet, batches, n_samples=10):
    correct = 0
    for xb, yb in batches:
        outs = torch.stack([model(xb) for _ in range(n_samples)])
        mean = outs.mean(0)  # expect[logit-space-average]
        correct += int((mean.argmax(1) == yb).sum())
    return correct


def factory_vote(x, n_samples=10):
    model = build_classifier()
    model.train()
    out = torch.stack([model(x) for _ in range(n_samples)]).mean(0)  # expect[logit-space-average]
    _, pred = out.max(1)
    return pred


def repeated_vote(model: SelfSamplingNet, x, n_samples=10):
    out = model(x.repeat(n_samples, 1)).view(n_samples, x.shape[0], -1)
    return out.mean(0).detach().cpu().numpy().argmax(axis=1)  # expect[logit-space-average]


def numpy_vote(model: SelfSamplingNet, x, n_samples=10):
    outs = [model(x).detach().numpy() for _ in range(n_samples)]
    return np.argmax(np.mean(outs, axis=0), axis=1)  # expect[logit-space-average]


def criterion_nll(model, x, y, n_samples=10):
    criterion = nn.CrossEntropyLoss()
    mean = torch.stack([model(x) for _ in range(n_samples)]).mean(0)  # expect[logit-space-average]
    return criterion(mean, y)
