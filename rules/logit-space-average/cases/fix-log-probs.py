import math

import torch
import torch.nn.functional as F


def mc_log_likelihood(model, x, y, n_samples=2):
    log_probs = torch.stack([F.log_softmax(model(x), dim=-1) for _ in range(n_samples)])
    mean_log_probs = log_probs.mean(dim=0)
    return mean_log_probs.gather(1, y.unsqueeze(1)).squeeze(1)


def mc_nll(model, x, y, n_samples=10):
    draws = [F.log_softmax(model(x), dim=-1) for _ in range(n_samples)]
    return F.nll_loss(sum(draws) / n_samples, y)


def ensemble_nll(members, x, y):
    log_probs = torch.stack([F.log_softmax(m(x), dim=-1) for m in members])
    return F.nll_loss(log_probs.mean(0), y)
