import torch
import torch.nn.functional as F
from torch import distributions as D

from .base import VariationalBase


class RainLinear(VariationalBase):
    """Dense layer with a factorised Gaussian over its weights."""

    def forward(self, x):
        s = self.sigma
        w = self.w_mu + s * torch.randn_like(s)
        b = self.b_mu + self.b_sigma * torch.randn_like(self.b_mu)
        return F.linear(x, w, b)

    def kl(self, prior_sigma=1.0):
        q_w = D.Normal(loc=self.w_mu, scale=self.posterior_scale())
        q_b = D.Normal(loc=self.b_mu, scale=self.b_sigma)
        prior = D.Normal(0.0, prior_sigma)
        return D.kl_divergence(q_w, prior).sum() + D.kl_divergence(q_b, prior).sum()


class RainLinearMean(VariationalBase):
    """Deterministic twin used for the 'posterior mean' baseline plots."""

    def forward(self, x):
        return F.linear(x, self.w_mu, self.b_mu)

    def kl(self, prior_sigma=1.0):
        return torch.zeros(())
