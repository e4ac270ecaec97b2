# Shared noise helpers.
import torch


def multiplicative(value, std):
    """value * (1 + std * eps): Gaussian dropout on whatever it is given."""
    return value * (1 + std * torch.randn_like(value))
