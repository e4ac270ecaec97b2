import torch
import torch.nn.functional as F
from layers import PumpLayerBase


class PumpLayer(PumpLayerBase):
    def forward(self, x):
        w = self.weight_mean + self.weight_std * torch.randn_like(self.weight_mean)
        return x @ w.t()
