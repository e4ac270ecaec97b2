"""MC averaging with a running sum (keeps memory flat for long vibration records)."""
import torch
from torch import nn

N_FAULTS = 5


class WindowNet(nn.Module):
    def __init__(self, n_in=256, n_faults=N_FAULTS):
        super().__init__()
        self.net = nn.Sequential(
            nn.Linear(n_in, 128), nn.Tanh(), nn.Dropout(0.2),
            nn.Linear(128, n_faults),
        )

    def forward(self, x):
        return self.net(x)


@torch.no_grad()
def mc_average(model, x, T=20):
    model.train()
    total = torch.zeros(x.shape[0], N_FAULTS)
    for _ in range(T):
        total += model(x)
    avg_logits = total / T
    return avg_logits.softmax(dim=-1)


@torch.no_grad()
def mc_average_probs(model, x, T=20):
    model.train()
    total = torch.zeros(x.shape[0], N_FAULTS)
    for _ in range(T):
        total += model(x).softmax(dim=-1)
    return total / T


def train(model, loader, epochs=10):
    opt = torch.optim.Adam(model.parameters())
    loss_fn = nn.CrossEntropyLoss()
    for _ in range(epochs):
        for xb, yb in loader:
            opt.zero_grad()
            loss_fn(model(xb), yb).backward()
            opt.step()
