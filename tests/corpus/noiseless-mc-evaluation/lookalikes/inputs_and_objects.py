"""Loops that look like MC sampling but vary the input, or sample a model that is not in eval mode."""
import torch
from torch import nn


class BearingMLP(nn.Module):
    def __init__(self, n_in=32, n_out=5):
        super().__init__()
        self.net = nn.Sequential(nn.Linear(n_in, 64), nn.ReLU(), nn.Dropout(0.2), nn.Linear(64, n_out))

    def forward(self, x):
        return self.net(x)


@torch.no_grad()
def input_noise_tta(model, x, noise_sd=0.05, T=20):
    model.eval()
    preds = [model(x + noise_sd * torch.randn_like(x)) for _ in range(T)]
    return torch.stack(preds).softmax(-1).mean(0)


@torch.no_grad()
def gain_tta(model, x, gains=(0.9, 0.95, 1.0, 1.05, 1.1)):
    model.eval()
    return torch.stack([model(x * g).softmax(-1) for g in gains]).mean(0)


@torch.no_grad()
def compare_with_baseline(x, T=30):
    baseline = BearingMLP()
    baseline.load_state_dict(torch.load("checkpoints/bearing_baseline.pt"))
    baseline.eval()
    candidate = BearingMLP()
    candidate.load_state_dict(torch.load("checkpoints/bearing_candidate.pt"))
    base_pred = baseline(x).argmax(-1)
    samples = torch.stack([candidate(x).softmax(-1) for _ in range(T)])
    return base_pred, samples.mean(0), samples.std(0)
