# The layers the classifier uses: the base class and the helper come from other files.
import torch.nn.functional as F

from layers import NoisyBase
from noise import multiplicative


class BearingNoisyLinear(NoisyBase):
    def forward(self, x):
        w = multiplicative(self.weight, self.noise_std)  # expect[unbounded-noise-rate]
        return F.linear(x, w)


class BearingNoisyActivation(NoisyBase):
    def forward(self, x):
        h = F.linear(x, self.weight)
        return multiplicative(h, self.log_alpha.exp().sqrt())  # expect[unbounded-noise-rate]
