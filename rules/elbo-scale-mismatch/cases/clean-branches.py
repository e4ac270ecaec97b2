# Look-alikes of branch-wise KL weighting for the pump-bearing classifier: every branch correct, reductions and KL
# weights chosen together, a wrong-looking loss that is only logged or recomputed after the step, and full-batch steps.
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


def every_branch_correct(kl_mode="per-batch"):
    for x, y in loader:
        nll_sum = F.cross_entropy(head(x), y, reduction="sum")
        kl = head.kl()
        if kl_mode == "scaled":
            loss = nll_sum * (n_train / x.shape[0]) + kl
        elif kl_mode == "per-batch":
            loss = nll_sum + kl / num_batches
        else:
            loss = nll_sum / x.shape[0] + kl / n_train
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def reduction_and_weight_chosen_together(per_datum=True):
    for x, y in loader:
        if per_datum:
            nll = F.cross_entropy(head(x), y)
            kl_weight = 1.0 / n_train
        else:
            nll = F.cross_entropy(head(x), y, reduction="sum")
            kl_weight = 1.0 / num_batches
        loss = nll + kl_weight * head.kl()
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def wrong_form_only_logged(history, log_every=50):
    for step, (x, y) in enumerate(loader):
        nll = F.cross_entropy(head(x), y)
        loss = nll + head.kl() / n_train
        if step % log_every == 0:
            unscaled = nll + head.kl()
            history.append(unscaled.item())
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def loss_name_reused_after_the_step(history, epochs=3):
    for _ in range(epochs):
        for x, y in loader:
            loss = F.cross_entropy(head(x), y) + head.kl() / n_train
            optimizer.zero_grad()
            loss.backward()
            optimizer.step()
            with torch.no_grad():
                loss = F.cross_entropy(head(x), y) + head.kl()
            history.append(loss.item())


def full_batch_or_minibatch(full_batch=True, steps=100):
    if full_batch:
        for _ in range(steps):
            loss = F.cross_entropy(head(bands), states, reduction="sum") + head.kl()
            optimizer.zero_grad()
            loss.backward()
            optimizer.step()
    else:
        for x, y in loader:
            loss = F.cross_entropy(head(x), y, reduction="sum") + head.kl() / num_batches
            optimizer.zero_grad()
            loss.backward()
            optimizer.step()


def per_datum_elbo(nll, kl, n_data=None):
    if n_data is None:
        return nll + kl
    return nll + kl / n_data


def objective(nll_sum, kl, batch_size, mode):
    if mode == "scaled":
        return nll_sum * n_train / batch_size + kl
    return nll_sum + kl


def helpers_called_with_their_correct_arguments():
    for x, y in loader:
        loss = per_datum_elbo(F.cross_entropy(head(x), y), head.kl(), n_data=n_train)
        loss = loss + objective(F.cross_entropy(head(x), y, reduction="sum"), head.kl(), len(x), "scaled") / n_train
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()
