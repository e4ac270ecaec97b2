# Base layer for the river-stage model: declares the weights and their log noise variance.
import torch
from torch import nn


class StageNoisyBase(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.theta = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.log_sigma2 = nn.Parameter(torch.full((n_out, n_in), -5.0) + torch.log(self.theta.detach() ** 2 + 1e-8))

    @property
    def log_alpha(self):
        return self.log_sigma2 - torch.log(self.theta ** 2 + 1e-8)
