"""Held-out scoring of the MC-dropout bearing classifier: NLL, Brier score."""
import math

import torch
import torch.nn.functional as F


def sample_log_probs(model, x, T):
    return torch.stack([F.log_softmax(model(x), dim=-1) for _ in range(T)])


@torch.no_grad()
def heldout_nll(model, x, y, T=64):
    logp = sample_log_probs(model, x, T)
    pred_logp = logp.mean(0)
    return F.nll_loss(pred_logp, y).item()


@torch.no_grad()
def heldout_nll_lme(model, x, y, T=64):
    logp = sample_log_probs(model, x, T)
    pred_logp = torch.logsumexp(logp, dim=0) - math.log(T)
    return F.nll_loss(pred_logp, y).item()


@torch.no_grad()
def brier(model, x, y, T=64):
    probs = sample_log_probs(model, x, T).exp().mean(0)
    onehot = F.one_hot(y, probs.shape[-1]).float()
    return ((probs - onehot) ** 2).sum(-1).mean().item()
