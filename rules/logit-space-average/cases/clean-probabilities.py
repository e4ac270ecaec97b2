# Pump-bearing classifier: MC-dropout and ensemble predictives averaged correctly (probabilities, log-mean-exp).
import math

import torch
import torch.nn.functional as F
from torch import nn


class PumpFaultNet(nn.Module):
    def __init__(self, n_bands=16, n_faults=5, p_drop=0.3):
        super().__init__()
        self.body = nn.Sequential(nn.Linear(n_bands, 32), nn.ReLU(), nn.Dropout(p_drop))
        self.head = nn.Linear(32, n_faults)

    def forward(self, x):
        return self.head(self.body(x))


class CalibratedFaultNet(PumpFaultNet):
    """Returns probabilities: a temperature-scaled softmax of the parent's logits."""

    def __init__(self, temperature=1.5):
        super().__init__()
        self.temperature = temperature

    def forward(self, x):
        return F.softmax(super().forward(x) / self.temperature, dim=-1)


def mc_probabilities(model: PumpFaultNet, x, n_samples=20):
    probs = torch.stack([F.softmax(model(x), dim=-1) for _ in range(n_samples)])
    return probs.mean(dim=0)


def mc_probabilities_after_stack(model: PumpFaultNet, x, n_samples=20):
    logits = torch.stack([model(x) for _ in range(n_samples)])
    return logits.softmax(dim=-1).mean(0).argmax(-1)


def mc_probabilities_functional(model: PumpFaultNet, x, n_samples=20):
    logits = torch.stack([model(x) for _ in range(n_samples)])
    mean_probs = torch.mean(F.softmax(logits, dim=-1), dim=0)
    return mean_probs.argmax(dim=-1)


def mc_log_predictive(model: PumpFaultNet, x, y, n_samples=20):
    log_probs = torch.stack([F.log_softmax(model(x), dim=-1) for _ in range(n_samples)])
    log_predictive = torch.logsumexp(log_probs, dim=0) - math.log(n_samples)
    return F.nll_loss(log_predictive, y)


def calibrated_vote(model: CalibratedFaultNet, x, n_samples=20):
    probs = torch.stack([model(x) for _ in range(n_samples)])
    return probs.mean(0).argmax(-1)


def running_probabilities(model: PumpFaultNet, x, n_samples=20):
    total = torch.zeros(x.shape[0], 5)
    for _ in range(n_samples):
        total += torch.softmax(model(x), dim=-1)
    return (total / n_samples).argmax(dim=-1)


def ensemble_probabilities(members, x):
    probs = [F.softmax(m(x), dim=-1) for m in members]
    return sum(probs) / len(probs)


def logit_spread(model: PumpFaultNet, x, n_samples=20):
    """Diagnostics only: how far the mean logit moves between runs (never used as a prediction)."""
    logits = torch.stack([model(x) for _ in range(n_samples)])
    centre = logits.mean(0)
    print("mean logit norm", float(centre.norm()))
    return logits.std(0)
