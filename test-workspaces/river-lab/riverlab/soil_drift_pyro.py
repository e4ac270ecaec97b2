"""Drift of the capacitive soil-moisture sensors against the reference probe (Pyro, SVI).

Each of the 12 field sensors reads  reference + offset[s] + drift[s] * days  plus noise,
in volumetric water content (m^3/m^3). Readings are invented.
"""
import numpy as np
import torch
import pyro
import pyro.distributions as dist
from pyro.infer import SVI, Trace_ELBO
from pyro.optim import ClippedAdam
from torch.distributions import constraints

N_SENSORS = 12


def simulate_readings(n=24_000, seed=5):
    rng = np.random.default_rng(seed)
    sensor = rng.integers(0, N_SENSORS, size=n)
    days = rng.uniform(0.0, 180.0, size=n)
    reference = rng.uniform(0.08, 0.42, size=n)
    drift = rng.normal(0.0, 2e-4, size=N_SENSORS)
    offset = rng.normal(0.0, 0.02, size=N_SENSORS)
    reading = reference + offset[sensor] + drift[sensor] * days + rng.normal(0.0, 0.01, size=n)
    as_t = lambda a: torch.tensor(a, dtype=torch.float32)
    return torch.tensor(sensor), as_t(days), as_t(reference), as_t(reading)


def drift_model(sensor, days, reference, reading=None):
    with pyro.plate("sensors", N_SENSORS):
        offset = pyro.sample("offset", dist.Normal(0.0, 0.05))
        drift = pyro.sample("drift", dist.Normal(0.0, 1e-3))
    noise = pyro.sample("noise", dist.HalfNormal(0.05))
    with pyro.plate("readings", len(reading)):
        mean = reference + offset[sensor] + drift[sensor] * days
        pyro.sample("obs", dist.Normal(mean, noise), obs=reading)


def drift_guide(sensor, days, reference, reading=None):
    off_loc = pyro.param("offset_loc", torch.zeros(N_SENSORS))
    off_scale = pyro.param("offset_scale", torch.full((N_SENSORS,), 0.01), constraint=constraints.positive)
    drift_loc = pyro.param("drift_loc", torch.zeros(N_SENSORS))
    drift_scale = pyro.param("drift_scale", torch.full((N_SENSORS,), 1e-4), constraint=constraints.positive)
    noise_loc = pyro.param("noise_loc", torch.tensor(-4.0))
    noise_scale = pyro.param("noise_scale", torch.tensor(0.1), constraint=constraints.positive)
    with pyro.plate("sensors", N_SENSORS):
        pyro.sample("offset", dist.Normal(off_loc, off_scale))
        pyro.sample("drift", dist.Normal(drift_loc, drift_scale))
    pyro.sample("noise", dist.LogNormal(noise_loc, noise_scale))


def fit(batch_size=256, epochs=20, lr=5e-3, seed=5):
    pyro.clear_param_store()
    pyro.set_rng_seed(seed)
    sensor, days, reference, reading = simulate_readings(seed=seed)
    svi = SVI(drift_model, drift_guide, ClippedAdam({"lr": lr}), loss=Trace_ELBO())
    for epoch in range(epochs):
        total = 0.0
        for idx in torch.randperm(len(reading)).split(batch_size):
            total += svi.step(sensor[idx], days[idx], reference[idx], reading[idx])
        print(f"epoch {epoch:2d}  ELBO loss {total:.1f}")
    drift_per_month = 30.0 * pyro.param("drift_loc").detach()
    for s, d in enumerate(drift_per_month.tolist()):
        print(f"sensor {s:2d}: drift {d:+.4f} m3/m3 per 30 days")


if __name__ == "__main__":
    fit()
