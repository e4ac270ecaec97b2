"""Variational dropout on GRU outputs (one alpha per feature)."""
import math

import torch
from torch import nn


class VariationalDropout(nn.Module):
    def __init__(self, n_features, init_p=0.1):
        super().__init__()
        init_alpha = init_p / (1 - init_p)
        self._log_alpha = nn.Parameter(torch.full((n_features,), math.log(init_alpha)))

    @property
    def alpha(self):
        return self._log_alpha.exp()

    def forward(self, h):
        if self.training:
            eps = torch.randn_like(h)
            return h * (1.0 + self.alpha.sqrt() * eps)
        return h

    def kl(self):
        a = self.alpha
        return -(0.5 * self._log_alpha + 1.16145124 * a - 1.50204118 * a ** 2 + 0.58629921 * a ** 3).sum()
