# Pump-bearing fault classifiers evaluated with "MC dropout" while the model is in eval mode.
import torch
import torch.nn.functional as F
from torch import nn


class PumpNet(nn.Module):
    """Band energies -> fault logits; dropout and BatchNorm between the layers."""

    def __init__(self, n_bands=32, hidden=64, n_faults=5, p=0.3):
        super().__init__()
        self.body = nn.Sequential(
            nn.Linear(n_bands, hidden),
            nn.BatchNorm1d(hidden),
            nn.ReLU(),
            nn.Dropout(p),
        )
        self.head = nn.Linear(hidden, n_faults)

    def forward(self, x):
        return self.head(self.body(x))


class FunctionalDropoutNet(nn.Module):
    def __init__(self, n_bands=32, n_faults=5):
        super().__init__()
        self.fc1 = nn.Linear(n_bands, 64)
        self.fc2 = nn.Linear(64, n_faults)

    def forward(self, x):
        h = F.relu(self.fc1(x))
        h = F.dropout(h, p=0.25, training=self.training)
        return self.fc2(h)


class GuardedNoiseNet(nn.Module):
    def __init__(self, n_bands=32, n_faults=5):
        super().__init__()
        self.fc = nn.Linear(n_bands, n_faults)

    def forward(self, x):
        if self.training:
            x = x * (1 + 0.5 * torch.randn_like(x))
        return self.fc(x)


def predict_after_eval(x, n_samples=30):
    model = PumpNet()
    model.eval()
    probs = torch.stack([F.softmax(model(x), dim=-1) for _ in range(n_samples)])  # expect[noiseless-mc-evaluation]
    return probs.mean(0), probs.std(0)


def predict_train_false(x):
    net = FunctionalDropoutNet().train(False)
    outs = []
    for _ in range(20):
        outs.append(net(x))  # expect[noiseless-mc-evaluation]
    return torch.stack(outs).var(dim=0)


def predict_accumulate(x, n_samples=16):
    model = GuardedNoiseNet()
    model.eval()
    total = torch.zeros(x.shape[0], 5)
    with torch.no_grad():
        for t in range(n_samples):
            total += F.softmax(model.forward(x), dim=-1)  # expect[noiseless-mc-evaluation]
    return total / n_samples


def predict_sequential(x):
    model = nn.Sequential(nn.Linear(32, 64), nn.ReLU(), nn.Dropout(0.5), nn.Linear(64, 5))
    model.eval()
    draws = torch.zeros(10, x.shape[0], 5)
    for i in range(10):
        draws[i] = model(x)  # expect[noiseless-mc-evaluation]
    return draws.std(dim=0)


class FaultEvaluator:
    def __init__(self, n_samples=25):
        self.model = PumpNet()
        self.n_samples = n_samples

    def predictive_entropy(self, x):
        self.model.eval()
        p = torch.stack(list(F.softmax(self.model(x), -1) for _ in range(self.n_samples))).mean(0)  # expect[noiseless-mc-evaluation]
        return -(p * p.clamp_min(1e-12).log()).sum(-1)
