"""River-stage forecaster: 48 h of catchment rainfall -> stage at the gauge 6 h ahead."""
from torch import nn

from .layers import BayesLinear


class RiverStageNet(nn.Module):
    def __init__(self, n_lags=48, n_hidden=64):
        super().__init__()
        self.fc1 = BayesLinear(n_lags, n_hidden)
        self.fc2 = BayesLinear(n_hidden, n_hidden)
        self.out = BayesLinear(n_hidden, 1)
        self.act = nn.SiLU()

    def forward(self, rain):
        h = self.act(self.fc1(rain))
        h = self.act(self.fc2(h))
        return self.out(h).squeeze(-1)

    def kl(self):
        return sum(m.kl() for m in self.modules() if isinstance(m, BayesLinear))
