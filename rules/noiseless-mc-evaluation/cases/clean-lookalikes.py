# Look-alikes of noiseless MC evaluation that really sample (or do not pretend to): none may be flagged.
import copy

import torch
import torch.nn.functional as F
from torch import nn


class PumpNet(nn.Module):
    def __init__(self, n_bands=32, n_faults=5, p=0.3):
        super().__init__()
        self.body = nn.Sequential(nn.Linear(n_bands, 64), nn.BatchNorm1d(64), nn.ReLU(), nn.Dropout(p))
        self.head = nn.Linear(64, n_faults)

    def forward(self, x):
        return self.head(self.body(x))

    def enable_mc(self):
        for layer in self.modules():
            if isinstance(layer, nn.Dropout):
                layer.train()


class BayesHead(nn.Module):
    """Samples its weights on every call, in train and eval mode alike."""

    def __init__(self, n_in, n_out):
        super().__init__()
        self.w_mu = nn.Parameter(torch.zeros(n_out, n_in))
        self.w_log_sigma = nn.Parameter(torch.full((n_out, n_in), -4.0))

    def forward(self, x):
        w = self.w_mu + self.w_log_sigma.exp() * torch.randn_like(self.w_mu)
        return F.linear(x, w)


class SamplingNet(nn.Module):
    def __init__(self):
        super().__init__()
        self.trunk = nn.Sequential(nn.Linear(32, 64), nn.ReLU(), nn.Dropout(0.2))
        self.head = BayesHead(64, 5)

    def forward(self, x):
        return self.head(self.trunk(x))


class AlwaysOnDropoutNet(nn.Module):
    def __init__(self):
        super().__init__()
        self.fc1 = nn.Linear(32, 64)
        self.fc2 = nn.Linear(64, 5)

    def forward(self, x):
        return self.fc2(F.dropout(F.relu(self.fc1(x)), p=0.3))


def enable_dropout(model):
    for m in model.modules():
        if m.__class__.__name__.startswith("Dropout"):
            m.train()


def mc_with_helper(x, n_samples=30):
    model = PumpNet()
    model.eval()
    enable_dropout(model)
    return torch.stack([model(x) for _ in range(n_samples)]).std(0)


def mc_with_method(x):
    model = PumpNet()
    model.eval()
    model.enable_mc()
    return torch.stack([model(x) for _ in range(20)]).var(0)


def mc_with_apply(x):
    model = PumpNet()
    model.eval()
    model.apply(lambda m: m.train() if isinstance(m, nn.Dropout) else None)
    return torch.stack([model(x) for _ in range(20)]).mean(0)


def mc_with_comprehension(x):
    model = PumpNet().eval()
    [m.train() for m in model.modules() if isinstance(m, nn.Dropout)]
    return torch.stack([model(x) for _ in range(20)]).mean(0)


def mc_whole_model_train(x):
    model = PumpNet()
    model.eval()
    model.train()
    return torch.stack([model(x) for _ in range(20)]).mean(0)


def mc_sampling_layers(x):
    model = SamplingNet()
    model.eval()
    return torch.stack([model(x) for _ in range(50)]).std(0)


def mc_functional_default(x):
    model = AlwaysOnDropoutNet()
    model.eval()
    return torch.stack([model(x) for _ in range(50)]).std(0)


def evaluate_batches(model, loader):
    model.eval()
    outs = []
    for xb, _ in loader:
        outs.append(model(xb))
    return torch.cat(outs)


def ensemble_predict(x, n_members=5):
    members = [PumpNet() for _ in range(n_members)]
    for member in members:
        member.eval()
    return torch.stack([F.softmax(member(x), -1) for member in members]).mean(0)


def ensemble_copies(x):
    base = PumpNet()
    base.eval()
    copies = [copy.deepcopy(base) for _ in range(5)]
    return torch.stack([c(x) for c in copies]).mean(0)


def test_time_augmentation(x):
    model = PumpNet()
    model.eval()
    return torch.stack([model(x + 0.05 * torch.randn_like(x)) for _ in range(20)]).mean(0)


def timing_loop(x):
    model = PumpNet()
    model.eval()
    for _ in range(100):
        model(x)


def single_pass(x):
    model = PumpNet()
    model.eval()
    return torch.stack([model(x) for _ in range(1)])


def maybe_eval(x, deterministic):
    model = PumpNet()
    if deterministic:
        model.eval()
    return torch.stack([model(x) for _ in range(20)]).std(0)


def mc_submodule(x):
    model = PumpNet()
    model.eval()
    model.body[3].train()
    return torch.stack([model(x) for _ in range(20)]).std(0)


def mc_flag(x):
    model = PumpNet()
    model.eval()
    for m in model.modules():
        if isinstance(m, nn.Dropout):
            m.training = True
    return torch.stack([model(x) for _ in range(20)]).std(0)
