# Pump-bearing fault classifier with a variational head: summed data terms paired with a wrongly scaled KL.
import torch
import torch.nn.functional as F
from torch import nn
from torch.utils.data import DataLoader, TensorDataset


class BearingHead(nn.Module):
    def __init__(self, n_bands, n_states):
        super().__init__()
        self.w_mu = nn.Parameter(torch.zeros(n_states, n_bands))
        self.w_log_sigma = nn.Parameter(torch.full((n_states, n_bands), -4.0))

    def forward(self, bands):
        w = self.w_mu + self.w_log_sigma.exp() * torch.randn_like(self.w_mu)
        return bands @ w.t()

    def kl(self):
        sigma = self.w_log_sigma.exp()
        return (-torch.log(sigma) + 0.5 * (sigma ** 2 + self.w_mu ** 2) - 0.5).sum()


bands = torch.randn(640, 32)
states = torch.randint(0, 5, (640,))
pump_loader = DataLoader(TensorDataset(bands, states), batch_size=64, shuffle=True)
num_train_examples = bands.shape[0]
head = BearingHead(32, 5)
optimizer = torch.optim.SGD(head.parameters(), lr=1e-3)
criterion = nn.CrossEntropyLoss(reduction="sum")


def sum_plus_full_kl():
    for x, y in pump_loader:
        logits = head(x)
        loss = F.cross_entropy(logits, y, reduction="sum") + head.kl()  # expect[elbo-scale-mismatch]
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def sum_plus_kl_over_dataset():
    for x, y in pump_loader:
        nll = criterion(head(x), y)
        loss = nll + head.kl() / num_train_examples  # expect[elbo-scale-mismatch]
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()


def summed_log_likelihood_plus_kl():
    for x, y in pump_loader:
        log_probs = F.log_softmax(head(x), dim=-1)
        nll = -log_probs.gather(1, y.unsqueeze(1)).sum()
        elbo = -nll - head.kl()  # expect[elbo-scale-mismatch]
        (-elbo).backward()
        optimizer.step()
