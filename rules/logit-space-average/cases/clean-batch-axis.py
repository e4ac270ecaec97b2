# Pump-bearing classifier: means over the batch or class axis, and loops over different inputs (no MC samples).
import torch
import torch.nn.functional as F
from torch import nn


class PumpFaultNet(nn.Module):
    def __init__(self, n_bands=16, n_faults=5):
        super().__init__()
        self.drop = nn.Dropout(0.3)
        self.head = nn.Linear(n_bands, n_faults)

    def forward(self, x):
        return self.head(self.drop(x))


def class_prior_from_logits(model: PumpFaultNet, x):
    """Softmax of the batch-mean logit: a summary of one batch, not an MC average."""
    return F.softmax(model(x).mean(0), dim=-1)


def per_pump_then_batch(model: PumpFaultNet, x, n_samples=10):
    outs = [model(x) for _ in range(n_samples)]
    batch_mean = torch.stack(outs, dim=1).mean(0)
    return F.softmax(batch_mean, dim=-1)


def predict_loader(model: PumpFaultNet, loader):
    batch_logits = []
    for xb, _ in loader:
        batch_logits.append(model(xb))
    return F.softmax(torch.stack(batch_logits).mean(0), dim=-1)


def windows_vote(model: PumpFaultNet, windows):
    scores = torch.stack([model(w) for w in windows])
    return scores.mean(0).argmax(-1)


def flattened_mean(model: PumpFaultNet, x, n_samples=10):
    rows = torch.cat([model(x) for _ in range(n_samples)])
    return F.softmax(rows.mean(0), dim=-1)


def class_average(model: PumpFaultNet, x, n_samples=10):
    logits = torch.stack([model(x) for _ in range(n_samples)])
    return F.softmax(logits, dim=-1).mean(0), logits.mean(-1)
