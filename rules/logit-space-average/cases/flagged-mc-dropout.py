# Pump-bearing fault classifier: MC-dropout passes averaged as logits, written in several shapes.
import torch
import torch.nn.functional as F
from torch import nn

N_FAULTS = 5


class PumpFaultNet(nn.Module):
    """Band energies of a vibration spectrum -> logits over the bearing states."""

    def __init__(self, n_bands=16, hidden=32, n_faults=N_FAULTS, p_drop=0.3):
        super().__init__()
        self.body = nn.Sequential(nn.Linear(n_bands, hidden), nn.ReLU(), nn.Dropout(p_drop))
        self.head = nn.Linear(hidden, n_faults)

    def forward(self, x):
        return self.head(self.body(x))


def mc_probabilities(model, x, n_samples=20):
    """Predictive fault probabilities from dropout passes."""
    model.train()
    logits = torch.stack([model(x) for _ in range(n_samples)])
    return F.softmax(logits.mean(dim=0), dim=-1)
    #                ^^^^^^^^^^^^^^^^^^ expect[logit-space-average]


def mc_vote(model: PumpFaultNet, x, n_samples=20):
    """Most likely fault per pump."""
    model.train()
    outs = []
    for _ in range(n_samples):
        outs.append(model(x))
    mean_logits = torch.mean(torch.stack(outs), dim=0)  # expect[logit-space-average]
    return mean_logits.argmax(dim=-1)


def mc_confidence(model, x, n_samples=20):
    """Top-class probability from one vectorised call over an expanded sample axis."""
    model.train()
    xs = x.unsqueeze(0).expand(n_samples, -1, -1)
    logits = model(xs)
    probs = torch.softmax(logits.mean(0), -1)  # expect[logit-space-average]
    return probs.max(dim=-1).values


def mc_nll(model, x, y, n_samples=20):
    """Test negative log-likelihood of the MC predictive."""
    model.train()
    logits = torch.stack([model(x) for _ in range(n_samples)])
    return F.cross_entropy(logits.mean(0), y)  # expect[logit-space-average]


def mc_fault_distribution(model, x, n_samples=20):
    """The predictive as a distribution object."""
    model.train()
    draws = []
    for seed in range(n_samples):
        torch.manual_seed(seed)
        logits = model(x)
        draws.append(logits.detach())
    return torch.distributions.Categorical(logits=torch.stack(draws).mean(0))  # expect[logit-space-average]
