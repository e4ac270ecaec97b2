# Local reparameterisation with the weight variance alpha * theta^2, log alpha trained and unbounded.
import torch
import torch.nn.functional as F
from torch import nn


class GaugeVDLinear(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.theta = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.log_alpha = nn.Parameter(torch.full((n_out, n_in), -3.0))

    def forward(self, x):
        mean = F.linear(x, self.theta)
        var = F.linear(x ** 2, torch.exp(self.log_alpha.clamp(max=0.0)) * self.theta ** 2)
        return mean + torch.sqrt(var + 1e-8) * torch.randn_like(mean)
