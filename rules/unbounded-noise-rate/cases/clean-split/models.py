# Subclasses that use the derived log alpha and a gate bounded at alpha <= 1: nothing here is an unbounded trainable rate.
import torch.nn.functional as F

from layers import AdditiveBase
from noise import gaussian_dropout


class StageLayer(AdditiveBase):
    def forward(self, x):
        w = gaussian_dropout(self.theta, self.log_alpha)
        return F.linear(x, w)


class GatedStageLayer(AdditiveBase):
    def forward(self, x):
        h = F.linear(x, self.theta)
        return gaussian_dropout(h, self.bounded_gate().unsqueeze(0))
