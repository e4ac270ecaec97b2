"""Train every ensemble member independently (own init, own shuffling)."""
import torch
import torch.nn.functional as F
from torch.utils.data import DataLoader


def train_member(member, dataset, epochs=40, seed=0):
    g = torch.Generator().manual_seed(seed)
    loader = DataLoader(dataset, batch_size=64, shuffle=True, generator=g)
    opt = torch.optim.AdamW(member.parameters(), lr=1e-3)
    for epoch in range(epochs):
        for spectra, labels in loader:
            loss = F.cross_entropy(member(spectra), labels)
            opt.zero_grad()
            loss.backward()
            opt.step()
    return member


def train_ensemble(ensemble, dataset, epochs=40):
    for k, member in enumerate(ensemble):
        train_member(member, dataset, epochs=epochs, seed=k)
    return ensemble
