"""MC-dropout uncertainty for the bearing classifier."""
import torch
from torch import nn
import torch.nn.functional as F


@torch.no_grad()
def mc_probs(model, x, T=50):
    """T stochastic passes -> (T, batch, n_faults) probabilities."""
    return torch.stack([F.softmax(model(x), dim=-1) for _ in range(T)])


def enable_mc_dropout(model):
    """Dropout back on; batch norm keeps its running statistics."""
    for m in model.modules():
        if isinstance(m, nn.Dropout):
            m.train()


@torch.no_grad()
def mc_probs_dropout_on(model, x, T=50):
    enable_mc_dropout(model)
    return torch.stack([F.softmax(model(x), dim=-1) for _ in range(T)])


def summarise(probs):
    mean = probs.mean(0)
    entropy = -(mean * mean.clamp_min(1e-12).log()).sum(-1)
    mutual_info = entropy + (probs * probs.clamp_min(1e-12).log()).sum(-1).mean(0)
    return mean, entropy, mutual_info
