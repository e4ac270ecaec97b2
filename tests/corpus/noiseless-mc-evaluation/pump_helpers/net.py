"""Self-normalising MLP for pump vibration features (SELU + alpha dropout)."""
from torch import nn


class PumpSNN(nn.Module):
    def __init__(self, n_in=32, n_out=5, hidden=128, p=0.05):
        super().__init__()
        self.body = nn.Sequential(
            nn.Linear(n_in, hidden), nn.SELU(), nn.AlphaDropout(p),
            nn.Linear(hidden, hidden), nn.SELU(), nn.AlphaDropout(p),
        )
        self.out = nn.Linear(hidden, n_out)

    def forward(self, x):
        return self.out(self.body(x))
