# Pump-bearing classifier layers with learned multiplicative Gaussian noise: every usual spelling, none bounded.
import torch
import torch.nn.functional as F
from torch import nn, randn_like
from torch.distributions import Normal


class BandGaussianDropout(nn.Module):
    """Noise x * (1 + sqrt(alpha) * eps) on the vibration band energies, one alpha per band."""

    def __init__(self, n_bands):
        super().__init__()
        self.alpha = nn.Parameter(torch.full((n_bands,), 0.25))

    def forward(self, x):
        eps = torch.randn_like(x)
        return x * (1 + torch.sqrt(self.alpha) * eps)
        #               ^^^^^^^^^^^^^^^^^^^^^^ expect[unbounded-noise-rate]


class HiddenGaussianDropout(nn.Module):
    def __init__(self, width):
        super().__init__()
        self.log_alpha = nn.Parameter(torch.full((width,), -2.0))

    def forward(self, h):
        alpha = self.log_alpha.exp()
        return h * (1 + alpha.sqrt() * randn_like(h))  # expect[unbounded-noise-rate]


class VibrationVDLinear(nn.Module):
    """Weight noise w * (1 + exp(log_alpha / 2) * eps), a local-reparameterisation twin, and a Normal draw."""

    def __init__(self, n_in, n_out):
        super().__init__()
        self.theta = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.log_alpha = nn.Parameter(torch.full((n_out, n_in), -4.0))

    @property
    def alpha(self):
        return self.log_alpha.exp()

    def noise_std(self):
        return (0.5 * self.log_alpha).exp()

    def forward(self, x):
        w = self.theta * (1.0 + torch.exp(0.5 * self.log_alpha) * torch.randn_like(self.theta))  # expect[unbounded-noise-rate]
        return F.linear(x, w)

    def forward_property(self, x):
        w = self.theta * (1.0 + self.alpha.sqrt() * torch.randn_like(self.theta))  # expect[unbounded-noise-rate]
        return F.linear(x, w)

    def forward_helper(self, x):
        w = self.theta + self.noise_std() * self.theta.abs() * torch.randn_like(self.theta)  # expect[unbounded-noise-rate]
        return F.linear(x, w)

    def forward_normal(self, x):
        w = Normal(self.theta, torch.sqrt(self.alpha) * torch.abs(self.theta)).rsample()  # expect[unbounded-noise-rate]
        return F.linear(x, w)

    def forward_lrt(self, x):
        mean = F.linear(x, self.theta)
        var = F.linear(x ** 2, torch.exp(self.log_alpha) * self.theta ** 2)  # expect[unbounded-noise-rate]
        return mean + torch.sqrt(var + 1e-8) * torch.randn_like(mean)

    def forward_matmul(self, x):
        var = (x * x) @ (self.alpha * self.theta.pow(2)).t()  # expect[unbounded-noise-rate]
        return x @ self.theta.t() + var.sqrt() * torch.randn_like(var)


def multiplicative_noise(x, log_alpha):
    return x * (1 + torch.exp(log_alpha / 2) * torch.randn_like(x))


class SpectrumNoise(nn.Module):
    def __init__(self, width):
        super().__init__()
        self.log_alpha = nn.Parameter(torch.zeros(width))

    def forward(self, x):
        return multiplicative_noise(x, self.log_alpha)  # expect[unbounded-noise-rate]
