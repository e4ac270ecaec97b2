# The probe drift model of the soil-moisture project: its observation plate takes the length of whatever it is fed.
import pyro
import pyro.distributions as dist


def drift_model(day, probe, moisture=None):
    bias = pyro.sample("bias", dist.Normal(0.0, 0.05).expand([24]).to_event(1))
    drift = pyro.sample("drift", dist.Normal(0.0, 1e-3))
    with pyro.plate("readings", len(day)):  # expect[elbo-scale-mismatch]
        pyro.sample("obs", dist.Normal(0.25 + bias[probe] + drift * day, 0.01), obs=moisture)
