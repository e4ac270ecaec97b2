# Suppressions that give their reason stay quiet.
import torch
from torch import nn

# noisewise: allow-file[unconstrained-std] the probe noise scale is calibrated by hand and never trained past zero


class ProbeNoise(nn.Module):
    def __init__(self):
        super().__init__()
        self.sigma = nn.Parameter(torch.ones(3))

    def forward(self, x):
        # noisewise: allow[unconstrained-std] tiny learning rate, sigma is clamped after every step by the trainer
        return x + self.sigma * torch.randn_like(x)
