"""Spread of the logits across MC passes as an out-of-distribution score (no prediction made)."""
import torch


@torch.no_grad()
def logit_ood_score(model, x, T=30):
    model.train()
    samples = torch.stack([model(x) for _ in range(T)])
    centre = samples.mean(0)
    spread = (samples - centre).pow(2).mean(0)
    return spread.sum(-1)


@torch.no_grad()
def flag_unusual_windows(model, x, threshold=2.5, T=30):
    score = logit_ood_score(model, x, T)
    return score > threshold * score.median()
