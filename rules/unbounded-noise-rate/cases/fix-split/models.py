# The noisy layer used by the river-stage forecaster: samples multiplicative weight noise.
import torch
import torch.nn.functional as F

from layers import StageNoisyBase


class StageNoisyLinear(StageNoisyBase):
    def forward(self, x):
        w = self.theta * (1 + self.log_alpha.mul(0.5).exp() * torch.randn_like(self.theta))
        return F.linear(x, w)
