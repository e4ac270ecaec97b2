"""Variational posteriors over the mean water level of each monitoring well (m below datum)."""
import math

import torch
from torch import nn
from torch.nn import Parameter as P
from torch.distributions import Normal as Gauss


class WellLevelPosterior(nn.Module):
    def __init__(self, n_wells, init_scale=0.1):
        super().__init__()
        self.loc = P(torch.zeros(n_wells))
        self.scale = P(torch.ones(n_wells) * init_scale)

    def sample(self, n=1):
        return self.loc + self.scale * torch.randn(n, *self.loc.shape)

    def log_q(self, z):
        return Gauss(self.loc, self.scale).log_prob(z).sum(-1)


class WellLevelPosteriorLog(nn.Module):
    """Same posterior, scale kept on the log scale."""

    def __init__(self, n_wells, init_scale=0.1):
        super().__init__()
        self.loc = P(torch.zeros(n_wells))
        self.log_scale = P(torch.full((n_wells,), math.log(init_scale)))

    def sample(self, n=1):
        return self.loc + self.log_scale.exp() * torch.randn(n, *self.loc.shape)

    def log_q(self, z):
        return Gauss(self.loc, torch.exp(self.log_scale)).log_prob(z).sum(-1)


class RechargePosterior(nn.Module):
    """Seasonal recharge amplitude per well; rho and log_sigma as in the lab notes."""

    def __init__(self, n_wells):
        super().__init__()
        self.amp_mu = P(torch.full((n_wells,), 0.4))
        self.amp_rho = P(torch.full((n_wells,), 0.05))
        self.phase_mu = P(torch.zeros(n_wells))
        self.phase_log_sigma = P(torch.full((n_wells,), -3.0))

    def sample(self):
        amp = self.amp_mu + self.amp_rho * torch.randn_like(self.amp_mu)
        phase = self.phase_mu + self.phase_log_sigma * torch.randn_like(self.phase_mu)
        return amp, phase

    def seasonal_level(self, t_days):
        amp, phase = self.sample()
        return amp[:, None] * torch.sin(2 * math.pi * t_days[None, :] / 365.25 + phase[:, None])
