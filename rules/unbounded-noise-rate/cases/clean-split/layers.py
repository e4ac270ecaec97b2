# Base layer with the additive parameterisation: theta and log sigma^2 are trained, log alpha is derived.
import torch
from torch import nn


class AdditiveBase(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.theta = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.log_sigma2 = nn.Parameter(torch.full((n_out, n_in), -10.0))
        self.log_gate = nn.Parameter(torch.full((n_out,), -2.0))

    @property
    def log_alpha(self):
        return self.log_sigma2 - torch.log(self.theta ** 2 + 1e-8)

    def bounded_gate(self):
        return torch.clamp(self.log_gate, max=0.0)
