# Trains every member of the pump ensemble on its own shuffle of the invented data.
import torch
import torch.nn.functional as F

from pumpnet.members import BearingEnsemble


def train_members(ensemble: BearingEnsemble, x, y, steps=20):
    for seed, member in enumerate(ensemble.members):
        torch.manual_seed(seed)
        optimiser = torch.optim.SGD(member.parameters(), lr=0.1)
        for _ in range(steps):
            perm = torch.randperm(x.shape[0])
            loss = F.cross_entropy(member(x[perm]), y[perm])
            optimiser.zero_grad()
            loss.backward()
            optimiser.step()
    return ensemble
