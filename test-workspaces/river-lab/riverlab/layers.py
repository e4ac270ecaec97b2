"""Stochastic layers shared by the lab's models."""
import math

import torch
from torch import nn
import torch.nn.functional as F


def softplus_inv(y):
    """rho such that softplus(rho) == y (for initialising rho from a target std)."""
    return math.log(math.expm1(y))


def gaussian_kl(mu_q, std_q, std_p):
    """KL(N(mu_q, std_q^2) || N(0, std_p^2)), summed over all entries."""
    return (torch.log(std_p / std_q) + (std_q ** 2 + mu_q ** 2) / (2 * std_p ** 2) - 0.5).sum()


class BayesLinear(nn.Module):
    """Mean-field Gaussian linear layer with std = softplus(rho) (Bayes by backprop)."""

    def __init__(self, in_features, out_features, prior_std=1.0, init_std=0.01):
        super().__init__()
        rho0 = softplus_inv(init_std)
        self.weight_mu = nn.Parameter(torch.empty(out_features, in_features).normal_(0.0, 0.1))
        self.weight_rho = nn.Parameter(torch.full((out_features, in_features), rho0))
        self.bias_mu = nn.Parameter(torch.zeros(out_features))
        self.bias_rho = nn.Parameter(torch.full((out_features,), rho0))
        self.register_buffer("prior_std", torch.tensor(float(prior_std)))

    def forward(self, x):
        w_std = F.softplus(self.weight_rho)
        b_std = F.softplus(self.bias_rho)
        w = self.weight_mu + w_std * torch.randn_like(w_std)
        b = self.bias_mu + b_std * torch.randn_like(b_std)
        return F.linear(x, w, b)

    def kl(self):
        return (gaussian_kl(self.weight_mu, F.softplus(self.weight_rho), self.prior_std)
                + gaussian_kl(self.bias_mu, F.softplus(self.bias_rho), self.prior_std))


class GaussianWeightLayer(nn.Module):
    """Base class: one weight mean and one weight std per connection.

    Subclasses (see models.py) implement forward() and kl().
    """

    def __init__(self, in_features, out_features, init_std=0.05):
        super().__init__()
        self.in_features = in_features
        self.out_features = out_features
        self.weight_mu = nn.Parameter(torch.empty(out_features, in_features).normal_(0.0, 0.1))
        self.weight_std = nn.Parameter(torch.full((out_features, in_features), init_std))
        self.bias = nn.Parameter(torch.zeros(out_features))

    def extra_repr(self):
        return f"in_features={self.in_features}, out_features={self.out_features}"


class AdaptiveGaussianDropout(nn.Module):
    """Multiplicative noise x * (1 + sqrt(alpha) * eps) with a learned alpha per feature.

    alpha = p / (1 - p) matches Bernoulli dropout with drop rate p. Off in eval mode.
    """

    # coefficients of the polynomial approximation of -KL (log-uniform prior)
    C1, C2, C3 = 1.16145124, -1.50204118, 0.58629921

    def __init__(self, n_features, p_init=0.2):
        super().__init__()
        self.log_alpha = nn.Parameter(torch.full((n_features,), math.log(p_init / (1.0 - p_init))))

    def forward(self, x):
        if not self.training:
            return x
        return x * (1.0 + torch.exp(0.5 * self.log_alpha) * torch.randn_like(x))

    def kl(self):
        alpha = self.log_alpha.exp()
        neg_kl = 0.5 * self.log_alpha + self.C1 * alpha + self.C2 * alpha ** 2 + self.C3 * alpha ** 3
        return -neg_kl.sum()


class ClampedGaussianDropout(AdaptiveGaussianDropout):
    """Same noise with alpha <= 1 (drop rate <= 0.5), where the KL approximation holds."""

    def forward(self, x):
        if not self.training:
            return x
        log_alpha = self.log_alpha.clamp(max=0.0)
        return x * (1.0 + torch.exp(0.5 * log_alpha) * torch.randn_like(x))
