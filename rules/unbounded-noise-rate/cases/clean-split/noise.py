# Shared helper: multiplicative Gaussian noise with a given log variance.
import torch


def gaussian_dropout(value, log_alpha):
    return value * (1 + torch.exp(0.5 * log_alpha) * torch.randn_like(value))
