"""AMBIGUOUS: Blundell-style per-batch KL weights pi_i = 2^(K-i-1) / (2^K - 1) with a summed NLL.

The weights add up to 1 over an epoch (SOURCES.md §1.4), so one epoch charges the full KL once,
as form (b) does on average. RULES.md's list of correct forms does not include non-uniform pi_i,
and no single step has the B/N factor, so the contract does not decide.
"""
import torch
import torch.nn.functional as F


def train(model, loader, epochs=20):
    opt = torch.optim.Adam(model.parameters(), lr=1e-3)
    K = len(loader)
    for epoch in range(epochs):
        for i, (x, y) in enumerate(loader):
            pi = 2 ** (K - i - 1) / (2 ** K - 1) if K < 1000 else (0.5 ** (i + 1))
            nll = F.cross_entropy(model(x), y, reduction="sum")
            loss = nll + pi * model.kl()
            opt.zero_grad()
            loss.backward()
            opt.step()
