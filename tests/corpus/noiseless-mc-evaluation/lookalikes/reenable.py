"""Dropout switched back on after eval(), in the usual ways."""
import torch
from torch import nn


class SpectrumNet(nn.Module):
    def __init__(self, n_bands=120, n_classes=4):
        super().__init__()
        self.net = nn.Sequential(
            nn.Linear(n_bands, 96), nn.BatchNorm1d(96), nn.ReLU(), nn.Dropout(0.3),
            nn.Linear(96, n_classes),
        )

    def forward(self, x):
        return self.net(x)


def enable_dropout(m):
    if type(m).__name__.startswith("Dropout"):
        m.train()


@torch.no_grad()
def mc_apply(model, x, T=30):
    model.eval()
    model.apply(enable_dropout)
    return torch.stack([model(x).softmax(-1) for _ in range(T)])


@torch.no_grad()
def mc_train_mode(model, x, val_x, T=30):
    model.eval()
    val_pred = model(val_x).argmax(-1)
    model.train()
    probs = torch.stack([model(x).softmax(-1) for _ in range(T)])
    return val_pred, probs


@torch.no_grad()
def mc_loop_reenable(model, x, T=30):
    model.eval()
    for module in model.modules():
        if isinstance(module, nn.Dropout):
            module.train()
    outs = []
    for _ in range(T):
        outs.append(model(x).softmax(-1))
    return torch.stack(outs).mean(0)
