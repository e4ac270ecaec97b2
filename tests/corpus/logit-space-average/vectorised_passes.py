"""Vectorised MC dropout: all T passes in one forward call by repeating the batch."""
import torch
from torch import nn
import torch.nn.functional as F


class BandMLP(nn.Module):
    """Band energies of a vibration spectrum -> fault logits; dropout always on (MC)."""

    def __init__(self, n_bands=32, n_faults=5, hidden=128, p=0.25):
        super().__init__()
        self.l1 = nn.Linear(n_bands, hidden)
        self.l2 = nn.Linear(hidden, hidden)
        self.head = nn.Linear(hidden, n_faults)
        self.p = p

    def forward(self, x):
        h = F.dropout(F.relu(self.l1(x)), self.p, training=True)
        h = F.dropout(F.relu(self.l2(h)), self.p, training=True)
        return self.head(h)


@torch.no_grad()
def predictive_fast(model, x, T=32):
    B = x.shape[0]
    logits = model(x.repeat(T, 1)).view(T, B, -1)
    return torch.softmax(logits.mean(0), dim=-1)


@torch.no_grad()
def predictive_fast_mixture(model, x, T=32):
    B = x.shape[0]
    logits = model(x.repeat(T, 1)).view(T, B, -1)
    return torch.softmax(logits, dim=-1).mean(0)


@torch.no_grad()
def predicted_fault(model, x, T=32):
    x_exp = x.unsqueeze(0).expand(T, *x.shape)
    logits = model(x_exp)
    return logits.mean(0).argmax(-1)


def fit(model, x, y, epochs=100):
    opt = torch.optim.Adam(model.parameters(), lr=1e-3)
    for _ in range(epochs):
        loss = F.cross_entropy(model(x), y)
        opt.zero_grad()
        loss.backward()
        opt.step()
