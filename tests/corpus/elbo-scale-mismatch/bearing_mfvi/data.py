"""Invented band-energy features for five bearing conditions."""
import torch
from torch.utils.data import TensorDataset


FAULTS = ["healthy", "inner_race", "outer_race", "ball", "cage"]


def invented_bearing_data(n=9_000, n_bands=32, seed=3):
    g = torch.Generator().manual_seed(seed)
    centres = torch.randn(len(FAULTS), n_bands, generator=g)
    labels = torch.randint(0, len(FAULTS), (n,), generator=g)
    feats = centres[labels] + 1.1 * torch.randn(n, n_bands, generator=g)
    return TensorDataset(feats, labels)
