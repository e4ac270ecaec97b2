# Leaf-spectrum layers whose multiplicative-noise std gets a small constant added: an epsilon keeps the std positive
# but does not bound the trainable log alpha, so every one of these is still unbounded.
import torch
import torch.nn.functional as F
from torch import nn
from torch.distributions import Normal


class LeafVDLinear(nn.Module):
    """Weights drawn from N(theta, alpha * theta^2) over 120 reflectance bands, written with an epsilon in several places."""

    def __init__(self, n_in, n_out):
        super().__init__()
        self.theta = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.log_alpha = nn.Parameter(torch.full((n_out, n_in), -4.0))

    def forward(self, x):
        w = Normal(self.theta, torch.exp(0.5 * self.log_alpha) * self.theta.abs() + 1e-8).rsample()  # expect[unbounded-noise-rate]
        return F.linear(x, w)

    def forward_abs_epsilon(self, x):
        w = Normal(self.theta, (self.theta.abs() + 1e-8) * self.log_alpha.mul(0.5).exp()).rsample()  # expect[unbounded-noise-rate]
        return F.linear(x, w)

    def forward_named_std(self, x):
        std = torch.exp(0.5 * self.log_alpha) * self.theta.abs() + 1e-6
        #     ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ expect[unbounded-noise-rate]
        return F.linear(x, Normal(self.theta, std).rsample())

    def forward_sqrt_variance(self, x):
        w = Normal(self.theta, torch.sqrt(self.log_alpha.exp() * self.theta ** 2 + 1e-8)).rsample()  # expect[unbounded-noise-rate]
        return F.linear(x, w)

    def forward_relative_sum(self, x):
        eps = torch.randn_like(self.theta)
        w = self.theta + (torch.exp(0.5 * self.log_alpha) * self.theta.abs() + 1e-8) * eps  # expect[unbounded-noise-rate]
        return F.linear(x, w)

    def forward_lrt(self, x):
        mu = F.linear(x, self.theta)
        var = F.linear(x ** 2, self.log_alpha.exp() * self.theta ** 2 + 1e-8)  # expect[unbounded-noise-rate]
        return mu + var.sqrt() * torch.randn_like(mu)


class BandGaussianDropout(nn.Module):
    """Noise x * (1 + sqrt(alpha + eps) * e) on the band energies, alpha trained directly."""

    def __init__(self, n_bands):
        super().__init__()
        self.alpha = nn.Parameter(torch.full((n_bands,), 0.25))

    def forward(self, x):
        return x * (1 + torch.sqrt(self.alpha + 1e-8) * torch.randn_like(x))  # expect[unbounded-noise-rate]
