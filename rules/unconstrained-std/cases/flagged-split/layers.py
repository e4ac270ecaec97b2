# Base layer: declares the variational parameters; subclasses decide how to sample.
import torch
from torch import nn


class GaugeLayerBase(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.weight_mean = nn.Parameter(torch.zeros(n_out, n_in))
        self.weight_std = nn.Parameter(torch.full((n_out, n_in), 0.02))
