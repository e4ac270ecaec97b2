"""Stage forecaster with variational-dropout layers; the layer class comes from the config."""
from torch import nn

from .layers import CappedVDLinearLRT, VDLinearLRT

LAYERS = {"free": VDLinearLRT, "capped": CappedVDLinearLRT}


class StageVDNet(nn.Module):
    def __init__(self, n_lags=48, hidden=64, layer="capped"):
        super().__init__()
        Layer = LAYERS[layer]
        self.l1 = Layer(n_lags, hidden)
        self.l2 = Layer(hidden, 1)

    def forward(self, rain):
        return self.l2(nn.functional.silu(self.l1(rain))).squeeze(-1)
