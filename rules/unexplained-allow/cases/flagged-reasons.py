# Suppressions in the soil-moisture calibration script.
import torch
from torch import nn


class ProbeNoise(nn.Module):
    def __init__(self):
        super().__init__()
        self.sigma = nn.Parameter(torch.ones(3))

    def forward(self, x):
        return x + self.sigma * torch.randn_like(x)  # noisewise: allow[unconstrained-std]
                                                    #^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ expect[unexplained-allow]
        # noisewise: allow[no-such-rule] the probe datasheet fixes this
       #^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ expect[unexplained-allow]
        y = x * 2
        # noisewise: allow-file[]
       #^^^^^^^^^^^^^^^^^^^^^^^^^ expect[unexplained-allow]
        return y
