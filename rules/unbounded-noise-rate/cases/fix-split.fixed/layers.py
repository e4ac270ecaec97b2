# Base layer for the river-stage model: declares the weights and their log noise variance.
import torch
from torch import nn


class StageNoisyBase(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.theta = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.log_alpha = nn.Parameter(torch.full((n_out, n_in), -5.0))
