"""AMBIGUOUS: the model is a TorchScript archive, so nothing says whether it returns logits.

Averaging then softmax strongly suggests logits, but RULES.md decides "logits" from the
model's forward or from cross_entropy-style uses, and neither is visible here.
"""
import torch


def mc_probs(path, x, T=30):
    model = torch.jit.load(path)
    model.train()
    with torch.no_grad():
        out = torch.stack([model(x) for _ in range(T)])
    return out.mean(0).softmax(-1)
