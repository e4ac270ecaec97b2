"""Small-site version of the moisture BNN: 400 calibration pairs, trained full-batch."""
import torch
from torch import nn
import pyro
import pyro.distributions as dist
from pyro.infer import SVI, Trace_ELBO
from pyro.infer.autoguide import AutoNormal
from pyro.nn import PyroModule, PyroSample


class SiteBNN(PyroModule):
    def __init__(self, n_features=4, hidden=16):
        super().__init__()
        self.fc1 = PyroModule[nn.Linear](n_features, hidden)
        self.fc1.weight = PyroSample(dist.Normal(0.0, 1.0).expand([hidden, n_features]).to_event(2))
        self.fc1.bias = PyroSample(dist.Normal(0.0, 1.0).expand([hidden]).to_event(1))
        self.out = PyroModule[nn.Linear](hidden, 1)
        self.out.weight = PyroSample(dist.Normal(0.0, 1.0).expand([1, hidden]).to_event(2))
        self.out.bias = PyroSample(dist.Normal(0.0, 1.0).expand([1]).to_event(1))

    def forward(self, x, y=None):
        mean = self.out(torch.tanh(self.fc1(x))).squeeze(-1)
        sigma = pyro.sample("sigma", dist.HalfNormal(0.05))
        with pyro.plate("data", x.shape[0]):
            pyro.sample("obs", dist.Normal(mean, sigma), obs=y)
        return mean


if __name__ == "__main__":
    g = torch.Generator().manual_seed(5)
    x_site = torch.randn(400, 4, generator=g)
    y_site = 0.3 + 0.05 * x_site[:, 0] + 0.01 * torch.randn(400, generator=g)
    pyro.clear_param_store()
    model = SiteBNN()
    guide = AutoNormal(model)
    svi = SVI(model, guide, pyro.optim.Adam({"lr": 5e-3}), Trace_ELBO())
    for step in range(3_000):
        loss = svi.step(x_site, y_site)
        if step % 500 == 0:
            print(step, loss)
