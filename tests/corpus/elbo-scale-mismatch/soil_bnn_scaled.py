"""Moisture BNN trained on minibatches, with the likelihood rescaled to the full calibration set."""
import torch
from torch import nn
import pyro
import pyro.distributions as dist
from pyro import poutine
from pyro.infer import SVI, TraceMeanField_ELBO
from pyro.infer.autoguide import AutoNormal
from pyro.nn import PyroModule, PyroSample
from torch.utils.data import DataLoader, TensorDataset


class ScaledMoistureBNN(PyroModule):
    def __init__(self, n_train, n_features=6, hidden=32):
        super().__init__()
        self.n_train = n_train
        self.fc1 = PyroModule[nn.Linear](n_features, hidden)
        self.fc1.weight = PyroSample(dist.Normal(0.0, 1.0).expand([hidden, n_features]).to_event(2))
        self.fc1.bias = PyroSample(dist.Normal(0.0, 1.0).expand([hidden]).to_event(1))
        self.fc2 = PyroModule[nn.Linear](hidden, 1)
        self.fc2.weight = PyroSample(dist.Normal(0.0, 1.0).expand([1, hidden]).to_event(2))
        self.fc2.bias = PyroSample(dist.Normal(0.0, 1.0).expand([1]).to_event(1))

    def forward(self, x, y=None):
        mean = self.fc2(torch.tanh(self.fc1(x))).squeeze(-1)
        sigma = pyro.sample("sigma", dist.HalfNormal(0.05))
        with pyro.plate("data", x.shape[0]), poutine.scale(scale=self.n_train / x.shape[0]):
            pyro.sample("obs", dist.Normal(mean, sigma), obs=y)
        return mean


def main(batch_size=256, epochs=100):
    g = torch.Generator().manual_seed(11)
    x = torch.randn(6_000, 6, generator=g)
    y = 0.25 + 0.04 * x[:, 0] + 0.01 * torch.randn(6_000, generator=g)
    loader = DataLoader(TensorDataset(x, y), batch_size=batch_size, shuffle=True)
    pyro.clear_param_store()
    model = ScaledMoistureBNN(n_train=len(x))
    guide = AutoNormal(model)
    svi = SVI(model, guide, pyro.optim.Adam({"lr": 1e-2}), TraceMeanField_ELBO())
    for epoch in range(epochs):
        for xb, yb in loader:
            svi.step(xb, yb)
    return guide


if __name__ == "__main__":
    main()
