"""Hand-written guides for probe_model (see model.py)."""
import torch
from torch import nn
import pyro
import pyro.distributions as dist
from pyro.distributions import constraints
from pyro.nn import PyroModule, PyroParam

from .model import N_PROBES


class ProbeGuide(nn.Module):
    def __init__(self, n_probes=N_PROBES):
        super().__init__()
        self.bias_loc = nn.Parameter(torch.zeros(n_probes))
        self.bias_scale = nn.Parameter(torch.full((n_probes,), 0.02))
        self.gain_loc = nn.Parameter(torch.ones(n_probes))
        self.gain_log_scale = nn.Parameter(torch.full((n_probes,), -4.0))
        self.noise_q_loc = torch.nn.Parameter(torch.tensor(-4.5))
        self.noise_q_scale = torch.nn.Parameter(torch.tensor(0.05))

    def forward(self, probe, temp, true_vwc, reading=None):
        pyro.module("probe_guide", self)
        with pyro.plate("probes", N_PROBES):
            pyro.sample("bias", dist.Normal(self.bias_loc, self.bias_scale))
            pyro.sample("gain", dist.Normal(self.gain_loc, self.gain_log_scale.exp()))
        pyro.sample(
            "noise_log",
            pyro.distributions.Normal(
                loc=self.noise_q_loc,
                scale=self.noise_q_scale,
            ),
        )
        coef_loc = pyro.param("coef_loc", torch.zeros(2))
        coef_scale = pyro.param("coef_scale", torch.tensor([1e-3, 5e-5]), constraint=constraints.positive)
        pyro.sample("coef", dist.Normal(coef_loc, coef_scale).to_event(1))


class ProbeGuideConstrained(PyroModule):
    """The version that went into the report: scales constrained positive."""

    def __init__(self, n_probes=N_PROBES):
        super().__init__()
        self.bias_loc = PyroParam(torch.zeros(n_probes))
        self.bias_scale = PyroParam(torch.full((n_probes,), 0.02), constraint=constraints.positive)
        self.gain_loc = PyroParam(torch.ones(n_probes))
        self.gain_scale = PyroParam(torch.full((n_probes,), 0.02), constraint=constraints.positive)
        self.noise_loc = PyroParam(torch.tensor(-4.5))
        self.noise_scale = PyroParam(torch.tensor(0.05), constraint=constraints.positive)
        self.coef_loc = PyroParam(torch.zeros(2))
        self.coef_scale = PyroParam(torch.tensor([1e-3, 5e-5]), constraint=constraints.positive)

    def forward(self, probe, temp, true_vwc, reading=None):
        with pyro.plate("probes", N_PROBES):
            pyro.sample("bias", dist.Normal(self.bias_loc, self.bias_scale))
            pyro.sample("gain", dist.Normal(self.gain_loc, self.gain_scale))
        pyro.sample("noise_log", dist.Normal(self.noise_loc, self.noise_scale))
        pyro.sample("coef", dist.Normal(self.coef_loc, self.coef_scale).to_event(1))
