# Leaf-spectrum predictive: probabilities averaged as probabilities, log-probabilities combined by log-mean-exp.
import math

import torch

from leafnet.models import LeafLogProbNet, LeafProbNet


def species_probabilities(model: LeafProbNet, spectra, n_passes=30):
    model.train()
    probs = torch.stack([model(spectra) for _ in range(n_passes)])
    return probs.mean(0)


def species_vote(spectra, n_passes=30):
    model = LeafProbNet().train()
    return sum(model(spectra) for _ in range(n_passes)).argmax(-1)


def species_log_predictive(model: LeafLogProbNet, spectra, n_passes=30):
    log_probs = torch.stack([model(spectra) for _ in range(n_passes)])
    return torch.logsumexp(log_probs, dim=0) - math.log(n_passes)
