# Pump-bearing classifier with KL-weighting switches: each branch's loss is judged on its own, so a correct sibling
# branch does not hide a wrong one.
import torch
import torch.nn.functional as F
from torch import nn
from torch.distributions import Normal, kl_divergence
from torch.utils.data import DataLoader, TensorDataset


class BearingBayesHead(nn.Module):
    def __init__(self, n_bands=32, n_states=5):
        super().__init__()
        self.w_mu = nn.Parameter(torch.zeros(n_states, n_bands))
        self.w_rho = nn.Parameter(torch.full((n_states, n_bands), -5.0))

    def forward(self, x):
        return x @ (self.w_mu + F.softplus(self.w_rho) * torch.randn_like(self.w_mu)).t()

    def kl(self):
        return kl_divergence(Normal(self.w_mu, F.softplus(self.w_rho)), Normal(0.0, 1.0)).sum()


bands = torch.randn(1_200, 32)
states = torch.randint(0, 5, (1_200,))
loader = DataLoader(TensorDataset(bands, states), batch_size=40, shuffle=True)
n_train = len(loader.dataset)
num_batches = len(loader)
head = BearingBayesHead()
optimizer = torch.optim.Adam(head.parameters(), lr=1e-3)


def scaled_or_full(kl_mode="full"):
    for x, y in loader:
        nll_sum = F.cross_entropy(head(x), y, reduction="sum")
        kl = head.kl()
        if kl_mode == "scaled":
            loss = nll_sum * (n_train / x.shape[0]) + kl
        elif kl_mode == "per-batch":
            loss = nll_sum + kl / num_batches
        else:
            loss = nll_sum + kl  # expect[elbo-scale-mismatch]
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def per_example_or_per_dataset(per_datum=False):
    for x, y in loader:
        nll_sum = F.cross_entropy(head(x), y, reduction="sum")
        if per_datum:
            loss = nll_sum * n_train / len(x) + head.kl()
        else:
            loss = nll_sum + head.kl() / n_train  # expect[elbo-scale-mismatch]
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def mean_branches(use_batches=True):
    for x, y in loader:
        nll = F.cross_entropy(head(x), y)
        loss = nll + head.kl() / n_train
        if use_batches:
            loss = nll + head.kl() / num_batches  # expect[elbo-scale-mismatch]
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def objective(nll_sum, kl, batch_size, mode):
    if mode == "scaled":
        return nll_sum * n_train / batch_size + kl
    return nll_sum + kl  # expect[elbo-scale-mismatch]


def helper_with_two_returns(mode="plain"):
    for x, y in loader:
        loss = objective(F.cross_entropy(head(x), y, reduction="sum"), head.kl(), len(x), mode)
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def conditional_expression(per_datum=False):
    for x, y in loader:
        nll = F.cross_entropy(head(x), y)
        loss = nll + head.kl() / n_train if per_datum else nll + head.kl()  # expect[elbo-scale-mismatch]
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def match_on_reduction(reduction="sum"):
    for x, y in loader:
        match reduction:
            case "mean":
                loss = F.cross_entropy(head(x), y) + head.kl() / n_train
            case _:
                loss = F.cross_entropy(head(x), y, reduction="sum") + head.kl()  # expect[elbo-scale-mismatch]
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def per_datum_elbo(nll, kl, n_data=None):
    if n_data is None:
        return nll + kl  # expect[elbo-scale-mismatch]
    return nll + kl / n_data


def fallback_without_dataset_size():
    for x, y in loader:
        loss = per_datum_elbo(F.cross_entropy(head(x), y), head.kl())
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()
