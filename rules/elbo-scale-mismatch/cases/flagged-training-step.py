# Bearing-fault training where minibatches arrive as the `batch` parameter of a step method or function (called
# from a loop over the training loader), and loss helpers called from the step inherit that minibatch.
import torch
import torch.nn.functional as F
from torch import nn
from torch.distributions import Normal, kl_divergence
from torch.utils.data import DataLoader, TensorDataset, random_split


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


def elbo_loss(logits, targets, kl, batch_size):
    return F.cross_entropy(logits, targets) + kl / batch_size  # expect[elbo-scale-mismatch]


class Trainer:
    def __init__(self, model, train_loader, lr=1e-3, device="cpu"):
        self.model = model.to(device)
        self.train_loader = train_loader
        self.opt = torch.optim.Adam(model.parameters(), lr=lr)
        self.device = device

    def training_step(self, batch):
        x, y = (t.to(self.device) for t in batch)
        loss = elbo_loss(self.model(x), y, self.model.kl(), x.size(0))
        self.opt.zero_grad()
        loss.backward()
        self.opt.step()
        return loss.item()

    def fit(self, epochs):
        for _ in range(epochs):
            losses = [self.training_step(b) for b in self.train_loader]
            print(sum(losses) / len(losses))


class SummingTrainer:
    def __init__(self, model, train_loader):
        self.model = model
        self.train_loader = train_loader
        self.opt = torch.optim.SGD(model.parameters(), lr=1e-3)

    def train_step(self, batch):
        x, y = [t.float() if t.is_floating_point() else t for t in batch]
        loss = F.cross_entropy(self.model(x), y, reduction="sum") + self.model.kl()  # expect[elbo-scale-mismatch]
        self.opt.zero_grad()
        loss.backward()
        self.opt.step()

    def fit(self, epochs):
        for _ in range(epochs):
            for batch in self.train_loader:
                self.train_step(batch)


def batch_loss(model, batch):
    features, labels = batch
    return F.cross_entropy(model(features), labels) + model.kl() / len(labels)  # expect[elbo-scale-mismatch]


def sgd_step(model, opt, batch):
    loss = batch_loss(model, batch)
    opt.zero_grad()
    loss.backward()
    opt.step()


features = torch.randn(2_352, 32)
labels = torch.randint(0, 5, (2_352,))
bearing_set, held_out = random_split(TensorDataset(features, labels), [0.85, 0.15])


def trainer_class(epochs=2):
    Trainer(BearingMFVI(), DataLoader(bearing_set, batch_size=120, shuffle=True)).fit(epochs)


def summing_trainer(epochs=2):
    SummingTrainer(BearingMFVI(), DataLoader(bearing_set, batch_size=80, shuffle=True)).fit(epochs)


def step_function(epochs=2):
    model = BearingMFVI()
    opt = torch.optim.Adam(model.parameters(), lr=1e-3)
    loader = DataLoader(bearing_set, batch_size=150, shuffle=True)
    for _ in range(epochs):
        for step, batch in enumerate(loader):
            sgd_step(model, opt, batch)
