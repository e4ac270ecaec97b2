"""Fit probe_model with SVI on invented readings from 16 probes."""
import torch
import pyro
from pyro.infer import SVI, Trace_ELBO
from pyro.optim import Adam

from .guide import ProbeGuide
from .model import N_PROBES, probe_model


def invented_readings(n=4_000, seed=0):
    g = torch.Generator().manual_seed(seed)
    probe = torch.randint(0, N_PROBES, (n,), generator=g)
    temp = 8.0 + 22.0 * torch.rand(n, generator=g)
    true_vwc = 0.1 + 0.3 * torch.rand(n, generator=g)
    bias = 0.03 * torch.randn(N_PROBES, generator=g)
    reading = true_vwc + bias[probe] + 1.5e-3 * (temp - 20.0) + 0.01 * torch.randn(n, generator=g)
    return probe, temp, true_vwc, reading


def main(steps=2_000):
    pyro.clear_param_store()
    data = invented_readings()
    guide = ProbeGuide()
    svi = SVI(probe_model, guide, Adam({"lr": 3e-3}), loss=Trace_ELBO())
    for step in range(steps):
        loss = svi.step(*data)
        if step % 200 == 0:
            print(step, round(loss, 1))
    print("bias estimates:", guide.bias_loc.detach().numpy().round(3))


if __name__ == "__main__":
    main()
