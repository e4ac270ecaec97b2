import torch
from torch import nn


class PumpLayerBase(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.weight_mean = nn.Parameter(torch.zeros(n_out, n_in))
        self.log_weight_std = nn.Parameter(torch.log(torch.ones(n_out, n_in) * 0.05))
