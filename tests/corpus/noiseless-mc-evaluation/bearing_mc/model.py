"""Bearing CNN with batch norm and dropout (vibration windows, invented)."""
from torch import nn


class BearingCNN(nn.Module):
    def __init__(self, n_faults=5, p_drop=0.3, width=32):
        super().__init__()
        self.features = nn.Sequential(
            nn.Conv1d(1, width, 9, stride=2), nn.BatchNorm1d(width), nn.ReLU(),
            nn.Conv1d(width, width, 9, stride=2), nn.BatchNorm1d(width), nn.ReLU(),
            nn.AdaptiveAvgPool1d(8),
        )
        self.classifier = nn.Sequential(
            nn.Flatten(), nn.Dropout(p_drop),
            nn.Linear(width * 8, 64), nn.ReLU(), nn.Dropout(p_drop),
            nn.Linear(64, n_faults),
        )

    def forward(self, x):
        return self.classifier(self.features(x.unsqueeze(1)))
