# Base class of the pump classifier's noisy layers: declares the weights and a trainable log alpha.
import torch
from torch import nn


class NoisyBase(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.weight = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.log_alpha = nn.Parameter(torch.full((n_out, n_in), -2.0))

    @property
    def noise_std(self):
        return torch.exp(self.log_alpha / 2)
