"""MC dropout that ignores the module mode, so model.eval() can be called for batch norm."""
import torch
from torch import nn
import torch.nn.functional as F


class MCDropout(nn.Dropout):
    def forward(self, x):
        return F.dropout(x, self.p, training=True)


class BearingMCNet(nn.Module):
    def __init__(self, n_in=32, n_out=5):
        super().__init__()
        self.l1 = nn.Linear(n_in, 128)
        self.bn = nn.BatchNorm1d(128)
        self.drop = MCDropout(0.25)
        self.out = nn.Linear(128, n_out)

    def forward(self, x):
        return self.out(self.drop(F.relu(self.bn(self.l1(x)))))


class StageFunctionalNet(nn.Module):
    def __init__(self, n_lags=48, p=0.1):
        super().__init__()
        self.l1 = nn.Linear(n_lags, 64)
        self.out = nn.Linear(64, 1)
        self.p = p

    def forward(self, x):
        return self.out(F.dropout(torch.tanh(self.l1(x)), p=self.p)).squeeze(-1)


@torch.no_grad()
def mc_bearing(model: BearingMCNet, x, T=50):
    model.eval()
    return torch.stack([model(x).softmax(-1) for _ in range(T)]).mean(0)


@torch.no_grad()
def mc_stage(x, T=100):
    net = StageFunctionalNet()
    net.load_state_dict(torch.load("checkpoints/stage_functional.pt"))
    net.eval()
    samples = []
    for _ in range(T):
        samples.append(net(x))
    samples = torch.stack(samples)
    return samples.mean(0), samples.std(0)
