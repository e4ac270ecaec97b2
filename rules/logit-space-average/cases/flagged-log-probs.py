# Pump-bearing classifier: log-probabilities of MC-dropout passes averaged as the predictive log-probability.
import torch
import torch.nn.functional as F
from torch import nn


class LogProbFaultNet(nn.Module):
    """Returns log-probabilities over the bearing states."""

    def __init__(self, n_bands=10, n_faults=3, p_drop=0.2):
        super().__init__()
        self.hidden = nn.Linear(n_bands, 20)
        self.drop = nn.Dropout(p_drop)
        self.out = nn.Linear(20, n_faults)

    def forward(self, x):
        h = self.drop(torch.relu(self.hidden(x)))
        return F.log_softmax(self.out(h), dim=-1)


def mc_log_likelihood(model, x, y, n_samples=2):
    """Per-example predictive log-likelihood of the true fault."""
    log_probs = torch.stack([F.log_softmax(model(x), dim=-1) for _ in range(n_samples)])
    mean_log_probs = log_probs.mean(dim=0)  # expect[logit-space-average]
    return mean_log_probs.gather(1, y.unsqueeze(1)).squeeze(1)


def mc_test_nll(model: LogProbFaultNet, x, y, n_samples=10):
    """Test negative log-likelihood of the MC predictive."""
    model.train()
    draws = torch.stack([model(x) for _ in range(n_samples)])
    return F.nll_loss(draws.mean(0), y)  # expect[logit-space-average]


def mc_log_predictive(model, x, n_samples=10):
    """Predictive log-probabilities from the softmax of each pass."""
    logs = []
    for _ in range(n_samples):
        probs = F.softmax(model(x), dim=-1)
        logs.append(torch.log(probs))
    return torch.stack(logs).mean(0)  # expect[logit-space-average]
