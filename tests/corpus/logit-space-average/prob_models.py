"""Models whose forward already returns probabilities: averaging their outputs is the mixture."""
import torch
from torch import nn
import torch.nn.functional as F
from torch.distributions import Categorical


class SpectrumSoftmaxNet(nn.Module):
    def __init__(self, n_bands=120, n_classes=4):
        super().__init__()
        self.net = nn.Sequential(
            nn.Linear(n_bands, 64), nn.ReLU(), nn.Dropout(0.3),
            nn.Linear(64, n_classes), nn.Softmax(dim=-1),
        )

    def forward(self, x):
        return self.net(x)


class BearingProbNet(nn.Module):
    def __init__(self, n_bands=32, n_faults=5):
        super().__init__()
        self.fc = nn.Linear(n_bands, 64)
        self.drop = nn.Dropout(0.2)
        self.out = nn.Linear(64, n_faults)

    def forward(self, x):
        return F.softmax(self.out(self.drop(torch.relu(self.fc(x)))), dim=1)


@torch.no_grad()
def leaf_mc(net: SpectrumSoftmaxNet, x, T=30):
    net.train()
    probs = torch.stack([net(x) for _ in range(T)]).mean(0)
    return probs.argmax(-1), probs


@torch.no_grad()
def bearing_mc(net: BearingProbNet, x, T=30):
    net.train()
    outs = [net(x) for _ in range(T)]
    p = sum(outs) / T
    return p


@torch.no_grad()
def bearing_mc_from_logits_model(logit_net, x, T=30):
    logit_net.train()
    probs = torch.stack([Categorical(logits=logit_net(x)).probs for _ in range(T)])
    return probs.mean(0)


def train_prob_net(net, x, y, epochs=100):
    opt = torch.optim.Adam(net.parameters(), lr=1e-3)
    for _ in range(epochs):
        loss = F.nll_loss(torch.log(net(x) + 1e-9), y)
        opt.zero_grad()
        loss.backward()
        opt.step()
