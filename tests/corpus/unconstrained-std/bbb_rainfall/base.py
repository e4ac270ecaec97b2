import torch
import torch.nn as nn


class VariationalBase(nn.Module):
    """Holds the variational parameters of a dense layer.

    The forward pass and the KL live in the subclasses (layers.py).
    """

    def __init__(self, n_in, n_out, sigma_0=0.02):
        super(VariationalBase, self).__init__()
        self.n_in, self.n_out = n_in, n_out
        self.w_mu = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.w_sigma = nn.Parameter(torch.ones(n_out, n_in) * sigma_0)
        self.b_mu = nn.Parameter(torch.zeros(n_out))
        self.b_log_sigma = nn.Parameter(torch.full((n_out,), -4.0))

    @property
    def sigma(self):
        return self.w_sigma

    def posterior_scale(self):
        return self.w_sigma

    @property
    def b_sigma(self):
        return self.b_log_sigma.exp()

    def n_weights(self):
        return self.w_mu.numel() + self.b_mu.numel()

    def __repr__(self):
        return f"{type(self).__name__}({self.n_in} -> {self.n_out})"
