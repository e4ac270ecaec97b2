"""Gaussian noise injection used as a regulariser during training."""
import torch
from torch import nn


class TrainingNoise(nn.Module):
    def __init__(self, sd=0.1):
        super().__init__()
        self.sd = sd

    def forward(self, h):
        if self.training:
            return h + self.sd * torch.randn_like(h)
        return h
