"""Bayes-by-backprop rainfall-runoff net (invented data)."""
from .layers import RainLinear
from .model import RunoffNet

__all__ = ["RainLinear", "RunoffNet"]
