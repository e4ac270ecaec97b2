"""Temperature response of buried soil-moisture probes (Pyro model; invented readings).

reading = (gain[p] * true_vwc + bias[p]) + coef[0] * (temp - 20) + coef[1] * (temp - 20)^2 + noise
"""
import torch
import pyro
import pyro.distributions as dist

N_PROBES = 16


def probe_model(probe, temp, true_vwc, reading=None):
    with pyro.plate("probes", N_PROBES):
        bias = pyro.sample("bias", dist.Normal(0.0, 0.03))
        gain = pyro.sample("gain", dist.Normal(1.0, 0.1))
    coef = pyro.sample("coef", dist.Normal(torch.zeros(2), torch.tensor([2e-3, 1e-4])).to_event(1))
    noise_log = pyro.sample("noise_log", dist.Normal(-4.5, 0.5))
    dt = temp - 20.0
    mean = gain[probe] * true_vwc + bias[probe] + coef[0] * dt + coef[1] * dt ** 2
    with pyro.plate("readings", size=len(probe)):
        pyro.sample("obs", dist.Normal(mean, noise_log.exp()), obs=reading)
