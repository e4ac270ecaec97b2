# Evaluation wrappers that keep the pump classifier: eval mode set in __init__ or before the wrapper is built.
import torch
import torch.nn.functional as F
from torch import nn


class PumpNet(nn.Module):
    def __init__(self, n_bands=32, n_faults=5):
        super().__init__()
        self.layers = nn.ModuleList([nn.Sequential(nn.Linear(n_bands, n_bands), nn.ReLU(), nn.Dropout(0.2)) for _ in range(3)])
        self.head = nn.Linear(n_bands, n_faults)

    def forward(self, x):
        for layer in self.layers:
            x = layer(x)
        return self.head(x)


class MCDropoutPredictor:
    """Predictive mean and spread from repeated passes."""

    def __init__(self, model, n_samples=50):
        self.model = model
        self.model.eval()
        self.n_samples = n_samples

    @torch.no_grad()
    def predict(self, x):
        probs = torch.stack([F.softmax(self.model(x), dim=-1) for _ in range(self.n_samples)])  # expect[noiseless-mc-evaluation]
        return probs.mean(0), probs.std(0)


class VoteCounter:
    def __init__(self, model, n_votes=15):
        self.model = model
        self.n_votes = n_votes

    def votes(self, x):
        counts = torch.zeros(x.shape[0], 5)
        for _ in range(self.n_votes):
            counts += F.one_hot(self.model(x).argmax(-1), 5)  # expect[noiseless-mc-evaluation]
        return counts


def report(x):
    predictor = MCDropoutPredictor(PumpNet())
    counter = VoteCounter(PumpNet().eval())
    return predictor.predict(x), counter.votes(x)
