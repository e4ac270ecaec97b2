"""Validation NLL of the ensemble, used to pick the number of members."""
import torch
import torch.nn.functional as F


@torch.no_grad()
def validation_nll(ensemble, loader):
    total, n = 0.0, 0
    for spectra, labels in loader:
        avg_logits = torch.stack([m(spectra) for m in ensemble]).mean(dim=0)
        total += F.cross_entropy(avg_logits, labels, reduction="sum").item()
        n += len(labels)
    return total / n


@torch.no_grad()
def validation_nll_mixture(ensemble, loader):
    total, n = 0.0, 0
    for spectra, labels in loader:
        probs = torch.stack([F.softmax(m(spectra), dim=-1) for m in ensemble]).mean(dim=0)
        total += F.nll_loss(probs.clamp_min(1e-12).log(), labels, reduction="sum").item()
        n += len(labels)
    return total / n
