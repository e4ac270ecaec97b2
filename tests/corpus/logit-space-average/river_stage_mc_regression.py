"""MC-dropout regression of river stage: predictive mean and spread (no classification)."""
import torch
from torch import nn
import torch.nn.functional as F


class StageNet(nn.Module):
    """Rainfall window -> (stage mean, raw log-variance)."""

    def __init__(self, n_lags=48, hidden=64, p=0.1):
        super().__init__()
        self.body = nn.Sequential(
            nn.Linear(n_lags, hidden), nn.ReLU(), nn.Dropout(p),
            nn.Linear(hidden, hidden), nn.ReLU(), nn.Dropout(p),
        )
        self.head = nn.Linear(hidden, 2)

    def forward(self, rain):
        return self.head(self.body(rain))


@torch.no_grad()
def predictive(net, rain, T=100, y_mean=1.2, y_std=0.4):
    net.train()
    out = torch.stack([net(rain) for _ in range(T)])
    mu_s, raw_var = out[..., 0], out[..., 1]
    mean = mu_s.mean(0)
    aleatoric = F.softplus(raw_var).mean(0)
    epistemic = mu_s.var(0)
    sd = (aleatoric + epistemic).sqrt()
    return mean * y_std + y_mean, sd * y_std


@torch.no_grad()
def point_forecast(net, rain, T=100):
    net.train()
    stage = torch.stack([net(rain)[..., 0] for _ in range(T)]).mean(dim=0)
    return stage


def train(net, rain, stage, epochs=200):
    opt = torch.optim.Adam(net.parameters(), lr=1e-3)
    for _ in range(epochs):
        out = net(rain)
        loss = F.gaussian_nll_loss(out[:, 0], stage, F.softplus(out[:, 1]) + 1e-4)
        opt.zero_grad()
        loss.backward()
        opt.step()
