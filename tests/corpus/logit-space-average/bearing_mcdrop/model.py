"""1-D CNN on pump-bearing vibration windows (2048 samples at 10 kHz, invented)."""
import torch
from torch import nn


class BearingNet(nn.Module):
    def __init__(self, n_faults=5, p_drop=0.3):
        super().__init__()
        self.features = nn.Sequential(
            nn.Conv1d(1, 16, kernel_size=9, stride=2), nn.ReLU(),
            nn.Conv1d(16, 32, kernel_size=9, stride=2), nn.ReLU(),
            nn.AdaptiveAvgPool1d(16),
        )
        self.drop = nn.Dropout(p_drop)
        self.fc = nn.Linear(32 * 16, 64)
        self.head = nn.Linear(64, n_faults)

    def forward(self, x):
        h = self.features(x.unsqueeze(1)).flatten(1)
        h = self.drop(torch.relu(self.fc(self.drop(h))))
        return self.head(h)
