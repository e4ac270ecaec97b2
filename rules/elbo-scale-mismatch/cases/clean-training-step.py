# Look-alikes of step-method training for the bearing classifier: steps scaled correctly, a step fed the whole
# training set, a step that only evaluates, and per-example loops inside a step.
import torch
import torch.nn.functional as F
from torch import nn
from torch.distributions import Normal, kl_divergence
from torch.utils.data import DataLoader, TensorDataset


class BearingMFVI(nn.Module):
    def __init__(self, n_bands=32, n_states=5):
        super().__init__()
        self.loc = nn.Parameter(torch.randn(n_states, n_bands) * 0.05)
        self.raw_scale = nn.Parameter(torch.full((n_states, n_bands), -5.0))

    def posterior(self):
        return Normal(self.loc, F.softplus(self.raw_scale))

    def forward(self, x):
        return F.linear(x, self.posterior().rsample())

    def kl(self):
        return kl_divergence(self.posterior(), Normal(0.0, 1.0)).sum()


class Trainer:
    def __init__(self, model, train_loader, lr=1e-3):
        self.model = model
        self.train_loader = train_loader
        self.opt = torch.optim.Adam(model.parameters(), lr=lr)

    def training_step(self, batch):
        x, y = (t.float() if t.is_floating_point() else t for t in batch)
        loss = F.cross_entropy(self.model(x), y) + self.model.kl() / len(self.train_loader.dataset)
        self.opt.zero_grad()
        loss.backward()
        self.opt.step()

    def summed_step(self, batch):
        x, y = batch
        loss = F.cross_entropy(self.model(x), y, reduction="sum") + self.model.kl() / len(self.train_loader)
        self.opt.zero_grad()
        loss.backward()
        self.opt.step()

    @torch.no_grad()
    def evaluation_step(self, batch):
        x, y = batch
        return (F.cross_entropy(self.model(x), y) + self.model.kl()).item()

    def fit(self, epochs):
        for _ in range(epochs):
            for batch in self.train_loader:
                self.training_step(batch)
                self.summed_step(batch)
                self.evaluation_step(batch)


def full_data_step(model, opt, batch):
    x, y = batch
    loss = F.cross_entropy(model(x), y, reduction="sum") + model.kl()
    opt.zero_grad()
    loss.backward()
    opt.step()


def per_example_step(model, opt, batch, n_train):
    x, y = batch
    per_example = [F.cross_entropy(model(row[None]), label[None]) for row, label in zip(x, y)]
    loss = torch.stack(per_example).mean() + model.kl() / n_train
    opt.zero_grad()
    loss.backward()
    opt.step()


features = torch.randn(2_400, 32)
labels = torch.randint(0, 5, (2_400,))
bearing_set = TensorDataset(features, labels)


def run(epochs=2):
    model = BearingMFVI()
    Trainer(model, DataLoader(bearing_set, batch_size=120, shuffle=True)).fit(epochs)
    opt = torch.optim.Adam(model.parameters(), lr=1e-3)
    for _ in range(100):
        full_data_step(model, opt, (features, labels))
    loader = DataLoader(bearing_set, batch_size=64, shuffle=True)
    for batch in loader:
        per_example_step(model, opt, batch, len(bearing_set))
