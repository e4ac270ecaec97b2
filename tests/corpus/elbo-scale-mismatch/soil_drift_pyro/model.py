"""Probe drift model: reading = base + probe bias + probe drift * days + temperature term + noise."""
import pyro
import pyro.distributions as dist

N_PROBES = 24


def drift_model(days, temp, probe, reading=None):
    with pyro.plate("probes", N_PROBES):
        bias = pyro.sample("bias", dist.Normal(0.0, 0.05))
        drift = pyro.sample("drift", dist.Normal(0.0, 1e-3))
    base = pyro.sample("base", dist.Normal(0.25, 0.1))
    temp_coef = pyro.sample("temp_coef", dist.Normal(0.0, 0.01))
    noise = pyro.sample("noise", dist.HalfNormal(0.02))
    mean = base + bias[probe] + drift[probe] * days + temp_coef * (temp - 20.0)
    with pyro.plate("readings", len(days)):
        pyro.sample("obs", dist.Normal(mean, noise), obs=reading)
    return mean


def drift_model_subsampled(days, temp, probe, reading=None, n_total=None):
    """Same model for minibatches: the plate knows the season's size and rescales the likelihood."""
    with pyro.plate("probes", N_PROBES):
        bias = pyro.sample("bias", dist.Normal(0.0, 0.05))
        drift = pyro.sample("drift", dist.Normal(0.0, 1e-3))
    base = pyro.sample("base", dist.Normal(0.25, 0.1))
    temp_coef = pyro.sample("temp_coef", dist.Normal(0.0, 0.01))
    noise = pyro.sample("noise", dist.HalfNormal(0.02))
    mean = base + bias[probe] + drift[probe] * days + temp_coef * (temp - 20.0)
    with pyro.plate("readings", size=n_total, subsample_size=len(days)):
        pyro.sample("obs", dist.Normal(mean, noise), obs=reading)
    return mean
