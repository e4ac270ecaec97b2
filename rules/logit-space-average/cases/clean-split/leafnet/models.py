# Leaf-spectrum classifiers whose forward already returns probabilities or log-probabilities.
import torch.nn.functional as F
from torch import nn


class LeafProbNet(nn.Module):
    def __init__(self, n_bands=40, n_species=4):
        super().__init__()
        self.layers = nn.Sequential(nn.Linear(n_bands, 32), nn.ReLU(), nn.Dropout(0.2), nn.Linear(32, n_species), nn.Softmax(dim=-1))

    def forward(self, x):
        return self.layers(x)


class LeafLogProbNet(nn.Module):
    def __init__(self, n_bands=40, n_species=4):
        super().__init__()
        self.hidden = nn.Linear(n_bands, 32)
        self.out = nn.Linear(32, n_species)

    def forward(self, x):
        return F.log_softmax(self.out(F.dropout(F.relu(self.hidden(x)), 0.2, training=True)), dim=-1)
