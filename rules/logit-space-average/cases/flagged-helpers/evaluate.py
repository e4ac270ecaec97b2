# Evaluates the bearing classifier with samples drawn by helpers in another module, averaged here as logits.
import torch
import torch.nn.functional as F

from bearings.model import BearingFaultNet
from bearings.sampling import mc_log_probs, mc_logits, mc_pass_list, member_logits, stacked_passes


def mc_probabilities(model, x, n_samples=20):
    return F.softmax(mc_logits(model, x, n_samples).mean(0), dim=-1)  # expect[logit-space-average]


def mc_nll(model, x, y, n_samples=20):
    log_p = mc_log_probs(model, x, n_samples)
    return F.nll_loss(log_p.mean(0), y)  # expect[logit-space-average]


def mc_vote(model, x, n_samples=20):
    return (sum(mc_pass_list(model, x, n_samples)) / n_samples).argmax(-1)  # expect[logit-space-average]


def nested_probabilities(model, x, n_samples=20):
    logits = stacked_passes(model, x, n_samples)
    return torch.softmax(logits.mean(dim=0), dim=-1)  # expect[logit-space-average]


def members_probabilities(members, x):
    return F.softmax(member_logits(members, x).mean(0), dim=-1)  # expect[logit-space-average]


def report(x, y):
    model = BearingFaultNet()
    return mc_vote(model, x), mc_nll(model, x, y)
