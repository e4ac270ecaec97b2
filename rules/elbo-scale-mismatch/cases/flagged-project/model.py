# The classifier: a stack of variational layers whose KL is the sum of the layers' KLs.
import torch
from torch import nn

from layers import VariationalDense


class BearingClassifier(nn.Module):
    def __init__(self, n_bands=32, hidden=64, n_states=5):
        super().__init__()
        self.layers = nn.ModuleList([VariationalDense(n_bands, hidden), VariationalDense(hidden, n_states)])

    def forward(self, x):
        for layer in self.layers[:-1]:
            x = torch.relu(layer(x))
        return self.layers[-1](x)

    def kl(self):
        return sum(layer.kl() for layer in self.layers)
