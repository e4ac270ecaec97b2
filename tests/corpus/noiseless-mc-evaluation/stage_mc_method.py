"""River-stage nets that carry their own uncertainty method."""
import torch
from torch import nn


class DropoutStageNet(nn.Module):
    def __init__(self, n_lags=48, hidden=64, p=0.1):
        super().__init__()
        self.body = nn.Sequential(
            nn.Linear(n_lags, hidden), nn.ReLU(), nn.Dropout(p),
            nn.Linear(hidden, hidden), nn.ReLU(), nn.Dropout(p),
        )
        self.out = nn.Linear(hidden, 1)

    def forward(self, rain):
        return self.out(self.body(rain)).squeeze(-1)

    def predict_with_uncertainty(self, rain, T=50):
        self.eval()
        with torch.no_grad():
            preds = torch.stack([self(rain) for _ in range(T)])
        return preds.mean(0), preds.std(0)


class DropoutStageNetMC(DropoutStageNet):
    def predict_with_uncertainty(self, rain, T=50):
        self.eval()
        for m in self.modules():
            if isinstance(m, nn.Dropout):
                m.train()
        with torch.no_grad():
            preds = torch.stack([self(rain) for _ in range(T)])
        return preds.mean(0), preds.std(0)


if __name__ == "__main__":
    rain = torch.rand(16, 48)
    for cls in (DropoutStageNet, DropoutStageNetMC):
        mean, sd = cls().predict_with_uncertainty(rain)
        print(cls.__name__, sd.mean().item())
