"""Noise layers whose scales are fixed (not trained): nothing here should be reported."""
import torch
from torch import nn
from torch.distributions import Normal

SENSOR_NOISE_SD = 0.02  # from the probe data sheet (invented)


class FixedNoiseGauge(nn.Module):
    def __init__(self, n_out, noise_sd=0.05):
        super().__init__()
        self.mean = nn.Linear(16, n_out)
        self.register_buffer("noise_sd", torch.full((n_out,), noise_sd))
        self.prior_sd = 1.0
        self.frozen_sd = nn.Parameter(torch.tensor(0.1), requires_grad=False)
        self.jitter = torch.tensor(1e-3)
        self.calib_sd = torch.tensor(0.04, requires_grad=False)

    def forward(self, x):
        mu = self.mean(x)
        eps = torch.randn_like(mu)
        y = mu + self.noise_sd * eps
        y = y + SENSOR_NOISE_SD * torch.randn_like(y)
        return y + self.jitter * torch.randn(y.shape)

    def log_lik(self, x, y):
        return Normal(self.mean(x), self.frozen_sd).log_prob(y).sum()

    def calibrated(self, x):
        return Normal(loc=self.mean(x), scale=self.calib_sd)

    def prior(self):
        return Normal(torch.zeros(16), self.prior_sd * torch.ones(16))


def kl_to_standard_normal(mu):
    """KL(N(mu, 0.1^2) || N(0, 1)) for a fixed posterior std of 0.1."""
    sd = 0.1
    return (torch.log(1.0 / torch.tensor(sd)) + (sd ** 2 + mu ** 2) / 2 - 0.5).sum()


def perturbed_copy(w, sd=0.01):
    return w.detach() + sd * torch.randn_like(w)
