"""Training with KL warm-up and a sparsity report (fraction of weights with log alpha > 3)."""
import torch
from torch import nn
import torch.nn.functional as F

from .layers import Conv1dSVDO, LinearSVDO


class SparseBearingNet(nn.Module):
    def __init__(self, n_faults=5):
        super().__init__()
        self.conv = Conv1dSVDO(1, 8, 15)
        self.pool = nn.AdaptiveAvgPool1d(32)
        self.fc = LinearSVDO(8 * 32, n_faults)

    def forward(self, x):
        return self.fc(self.pool(F.relu(self.conv(x.unsqueeze(1)))).flatten(1))

    def kl(self):
        return self.conv.kl() + self.fc.kl()


def kl_weight(epoch):
    return 0.0 if epoch < 5 else min(1.0, (epoch - 5) / 15)


def sparsity(model):
    total = dropped = 0
    for m in model.modules():
        if isinstance(m, LinearSVDO):
            la = m.log_alpha
        elif isinstance(m, Conv1dSVDO):
            la = m.log_alpha()
        else:
            continue
        dropped += (la > 3).sum().item()
        total += la.numel()
    return dropped / total


def train(model, loader, n_train, epochs=60):
    opt = torch.optim.Adam(model.parameters(), lr=1e-3)
    for epoch in range(epochs):
        for xb, yb in loader:
            loss = F.cross_entropy(model(xb), yb) + kl_weight(epoch) * model.kl() / n_train
            opt.zero_grad()
            loss.backward()
            opt.step()
        print(epoch, f"sparsity {sparsity(model):.1%}")
