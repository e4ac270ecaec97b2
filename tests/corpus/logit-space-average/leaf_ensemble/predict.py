"""Ensemble prediction helpers."""
import torch
import torch.nn.functional as F


def member_outputs(ensemble, spectra):
    return torch.stack([member(spectra) for member in ensemble])


@torch.no_grad()
def predict_proba(ensemble, spectra):
    return F.softmax(member_outputs(ensemble, spectra).mean(0), dim=-1)


@torch.no_grad()
def predict_proba_mixture(ensemble, spectra):
    return member_outputs(ensemble, spectra).softmax(-1).mean(0)


@torch.no_grad()
def disagreement(ensemble, spectra):
    probs = member_outputs(ensemble, spectra).softmax(-1)
    return probs.var(0).sum(-1)
