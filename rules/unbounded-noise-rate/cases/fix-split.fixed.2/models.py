# The noisy layer used by the river-stage forecaster: samples multiplicative weight noise.
import torch
import torch.nn.functional as F

from layers import StageNoisyBase


class StageNoisyLinear(StageNoisyBase):
    def forward(self, x):
        w = self.theta + torch.exp(0.5 * self.log_sigma2) * torch.randn_like(self.theta)
        return F.linear(x, w)
