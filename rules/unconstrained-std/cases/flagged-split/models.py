# A subclass in another file samples with the base class's raw σ.
import torch
from layers import GaugeLayerBase


class StageLayer(GaugeLayerBase):
    def forward(self, x):
        w = self.weight_mean + self.weight_std * torch.randn_like(self.weight_mean)  # expect[unconstrained-std]
        return x @ w.t()
