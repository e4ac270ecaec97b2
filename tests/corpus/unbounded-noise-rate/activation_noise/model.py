"""River-stage MLP with a choice of activation-noise layer."""
from torch import nn

from .noise import FixedGaussianNoise, LearnedGaussianNoise, SigmoidGaussianNoise


def make_noise(kind, n_units):
    if kind == "learned":
        return LearnedGaussianNoise(n_units)
    if kind == "sigmoid":
        return SigmoidGaussianNoise(n_units)
    return FixedGaussianNoise(p=0.2)


class NoisyStageMLP(nn.Module):
    def __init__(self, n_lags=48, hidden=64, noise="learned"):
        super().__init__()
        self.l1 = nn.Linear(n_lags, hidden)
        self.n1 = make_noise(noise, hidden)
        self.l2 = nn.Linear(hidden, hidden)
        self.n2 = make_noise(noise, hidden)
        self.out = nn.Linear(hidden, 1)

    def forward(self, x):
        h = self.n1(nn.functional.relu(self.l1(x)))
        h = self.n2(nn.functional.relu(self.l2(h)))
        return self.out(h).squeeze(-1)
