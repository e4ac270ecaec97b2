# Predictive spread of the fault probabilities, aggregated with numpy.
import numpy as np

from loading import load_model
import torch


def spread(weights, x_test, n_samples=40):
    model = load_model(weights)
    for module in model.modules():
        if isinstance(module, torch.nn.Dropout):
            module.train()
    draws = np.stack([model(x_test).softmax(-1).detach().numpy() for _ in range(n_samples)])
    return draws.std(axis=0)
