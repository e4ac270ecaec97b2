# Helpers that return the MC-dropout samples of one prediction: stacked logits, stacked log-probabilities, a list.
import torch
import torch.nn.functional as F


def mc_logits(model, x, n_samples):
    return torch.stack([model(x) for _ in range(n_samples)])


def mc_log_probs(model, x, n_samples):
    return torch.stack([F.log_softmax(model(x), dim=-1) for _ in range(n_samples)])


def mc_pass_list(model, x, n_samples):
    passes = []
    for _ in range(n_samples):
        passes.append(model(x))
    return passes


def member_logits(members, x):
    return torch.stack([member(x) for member in members])


def stacked_passes(model, x, n_samples):
    """Two helpers deep: the samples come from mc_logits."""
    samples = mc_logits(model, x, n_samples)
    return samples
