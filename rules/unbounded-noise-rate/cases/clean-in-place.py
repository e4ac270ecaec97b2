# Learned noise rates bounded in place after each optimiser step (as some reference code does): not flagged.
import torch
from torch import nn


class RainGaussianDropout(nn.Module):
    def __init__(self, n):
        super().__init__()
        self.log_alpha = nn.Parameter(torch.full((n,), -3.0))

    def forward(self, x):
        return x * (1 + torch.exp(0.5 * self.log_alpha) * torch.randn_like(x))


class GaugeNoise(nn.Module):
    def __init__(self, n):
        super().__init__()
        self.rate_log = nn.Parameter(torch.full((n,), -3.0))

    def forward(self, x):
        return x * (1 + self.rate_log.mul(0.5).exp() * torch.randn_like(x))


class StationDropout(nn.Module):
    def __init__(self, n):
        super().__init__()
        self.station_log_alpha = nn.Parameter(torch.full((n,), -3.0))

    def forward(self, x):
        return x * (1 + torch.exp(0.5 * self.station_log_alpha) * torch.randn_like(x))

    def constrain(self):
        self.station_log_alpha.data.clamp_(max=0.0)


class SensorDropout(nn.Module):
    def __init__(self, n):
        super().__init__()
        self.sensor_log_alpha = nn.Parameter(torch.full((n,), -3.0))

    def forward(self, x):
        return x * (1 + torch.exp(0.5 * self.sensor_log_alpha) * torch.randn_like(x))


def bound_sensor(layer: SensorDropout):
    layer.sensor_log_alpha.data.clamp_(max=0.0)


def train_epoch(model, optimizer, batches):
    for x, y in batches:
        loss = ((model(x) - y) ** 2).mean()
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()
        with torch.no_grad():
            for name, p in model.named_parameters():
                if name.endswith("rate_log"):
                    p.clamp_(max=0.0)
            for m in model.modules():
                if isinstance(m, RainGaussianDropout):
                    m.log_alpha.data = torch.clamp(m.log_alpha.data, max=0.0)
