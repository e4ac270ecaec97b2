# Two soil-moisture noise layers with the same parameter name: the in-place bound after each step is applied only to
# instances of one of them (isinstance), so the other one's log alpha stays unbounded.
import torch
from torch import nn


class ProbeDropout(nn.Module):
    def __init__(self, n):
        super().__init__()
        self.log_alpha = nn.Parameter(torch.full((n,), -3.0))

    def forward(self, x):
        return x * (1 + torch.exp(0.5 * self.log_alpha) * torch.randn_like(x))


class DriftDropout(nn.Module):
    def __init__(self, n):
        super().__init__()
        self.log_alpha = nn.Parameter(torch.full((n,), -3.0))

    def forward(self, x):
        return x * (1 + self.log_alpha.mul(0.5).exp() * torch.randn_like(x))  # expect[unbounded-noise-rate]


def after_step(model):
    for m in model.modules():
        if isinstance(m, ProbeDropout):
            m.log_alpha.data.clamp_(max=0.0)
