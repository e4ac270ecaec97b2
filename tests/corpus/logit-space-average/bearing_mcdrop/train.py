"""Train BearingNet on invented vibration windows."""
import torch
import torch.nn.functional as F
from torch.utils.data import DataLoader, TensorDataset

from .model import BearingNet


def invented_windows(n=3_000, length=2048, n_faults=5, seed=0):
    g = torch.Generator().manual_seed(seed)
    y = torch.randint(0, n_faults, (n,), generator=g)
    t = torch.arange(length) / 10_000.0
    freqs = torch.tensor([0.0, 162.0, 107.0, 70.0, 12.0])
    x = 0.3 * torch.randn(n, length, generator=g) + torch.sin(2 * torch.pi * freqs[y, None] * t)
    return x, y


def train(epochs=20):
    x, y = invented_windows()
    loader = DataLoader(TensorDataset(x, y), batch_size=64, shuffle=True)
    model = BearingNet()
    opt = torch.optim.Adam(model.parameters(), lr=1e-3)
    for epoch in range(epochs):
        model.train()
        for xb, yb in loader:
            loss = F.cross_entropy(model(xb), yb)
            opt.zero_grad()
            loss.backward()
            opt.step()
    torch.save(model.state_dict(), "checkpoints/bearing_net.pt")
    return model
