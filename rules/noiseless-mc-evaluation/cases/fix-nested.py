# MC passes over the whole test loader, with eval mode set inside the pass loop.
import numpy as np
import torch
from torch import nn


class BearingNet(nn.Module):
    def __init__(self, n_bands=16, n_faults=4):
        super().__init__()
        self.net = nn.Sequential(nn.Linear(n_bands, 32), nn.BatchNorm1d(32), nn.ReLU(), nn.Dropout(0.4), nn.Linear(32, n_faults))

    def forward(self, x):
        return self.net(x)


def mc_over_loader(model, loader, forward_passes):
    passes = []
    for _ in range(forward_passes):
        model.eval()
        batches = []
        for spectra, _labels in loader:
            with torch.no_grad():
                batches.append(model(spectra).softmax(-1).numpy())
        passes.append(np.concatenate(batches))
    return np.stack(passes).std(axis=0)


def main(loader):
    return mc_over_loader(BearingNet(), loader, 20)
