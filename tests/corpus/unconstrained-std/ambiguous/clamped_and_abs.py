"""Scales made non-negative by operations that RULES.md does not name as positivity-preserving.

- clamp(min=...) keeps the value positive but kills the gradient below the bound;
- abs() and relu() + eps are positive but not smooth / dead below zero;
- sigma ** 2 passed as a scale, or an offset `raw + 0.1`, are not listed either way;
- sigma.detach() is no longer trained through this use (but is trained elsewhere);
- torch.normal(mean, std) draws with the std but is neither a Normal distribution object nor an
  explicit `mu + sigma * eps`.
Each is a judgement call for the rule, so none is scored.
"""
import torch
from torch import nn
import torch.nn.functional as F
from torch.distributions import Normal


class WeirLayer(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.mu = nn.Parameter(torch.zeros(n_out, n_in))
        self.sigma = nn.Parameter(torch.full((n_out, n_in), 0.02))
        self.s_raw = nn.Parameter(torch.zeros(n_out, n_in))

    def w_clamped(self):
        return self.mu + self.sigma.clamp(min=1e-4) * torch.randn_like(self.mu)

    def w_abs(self):
        return self.mu + torch.abs(self.sigma) * torch.randn_like(self.mu)

    def w_relu(self):
        return self.mu + (F.relu(self.sigma) + 1e-6) * torch.randn_like(self.mu)

    def q_squared(self):
        return Normal(self.mu, self.sigma ** 2)

    def w_offset(self):
        return self.mu + (self.s_raw + 0.1) * torch.randn_like(self.mu)

    def w_detached(self):
        return self.mu + self.sigma.detach() * torch.randn_like(self.mu)

    def w_torch_normal(self):
        return torch.normal(self.mu, self.sigma)
