from torch import nn

from .layers import BayesLinear


class PumpBNN(nn.Module):
    def __init__(self, n_in=32, n_out=5):
        super().__init__()
        self.l1 = BayesLinear(n_in, 64)
        self.l2 = BayesLinear(64, n_out)

    def forward(self, x):
        return self.l2(nn.functional.relu(self.l1(x)))


class PumpHybrid(nn.Module):
    """Deterministic body with dropout, Bayesian last layer."""

    def __init__(self, n_in=32, n_out=5):
        super().__init__()
        self.body = nn.Sequential(nn.Linear(n_in, 64), nn.ReLU(), nn.Dropout(0.2))
        self.head = BayesLinear(64, n_out)

    def forward(self, x):
        return self.head(self.body(x))
