"""AMBIGUOUS: MC means of a *regression* output passed through a sigmoid.

The sigmoid is a logistic approximation of the normal CDF (exceedance probability of bankfull
stage), not a normalisation of logits. RULES.md says regression averages stay quiet "(no
softmax/sigmoid downstream)" and decides "logits" from a forward ending in Linear, so the
contract points both ways.
"""
import torch
from torch import nn

BANKFULL_M = 2.35


class StageMC(nn.Module):
    def __init__(self, n_lags=48):
        super().__init__()
        self.net = nn.Sequential(nn.Linear(n_lags, 64), nn.ReLU(), nn.Dropout(0.1), nn.Linear(64, 1))

    def forward(self, x):
        return self.net(x).squeeze(-1)


@torch.no_grad()
def exceedance_probability(model, rain, T=200):
    model.train()
    stages = torch.stack([model(rain) for _ in range(T)])
    mean, sd = stages.mean(0), stages.std(0) + 0.05
    return torch.sigmoid(1.702 * (mean - BANKFULL_M) / sd)
