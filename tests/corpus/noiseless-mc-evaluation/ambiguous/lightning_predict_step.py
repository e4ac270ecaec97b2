"""AMBIGUOUS: MC loop inside a Lightning predict_step.

Lightning's Trainer puts the module in eval mode before calling predict_step, so the samples are
identical; but no `.eval()` appears on any code path here, and RULES.md only speaks of
`.eval()` / `.train(False)` on the path (in the code, a caller or a helper).
"""
import lightning.pytorch as pl
import torch
from torch import nn
import torch.nn.functional as F


class BearingLit(pl.LightningModule):
    def __init__(self, T=50):
        super().__init__()
        self.net = nn.Sequential(nn.Linear(32, 64), nn.ReLU(), nn.Dropout(0.3), nn.Linear(64, 5))
        self.T = T

    def training_step(self, batch, batch_idx):
        x, y = batch
        return F.cross_entropy(self.net(x), y)

    def predict_step(self, batch, batch_idx):
        x, _ = batch
        probs = torch.stack([self.net(x).softmax(-1) for _ in range(self.T)])
        return probs.mean(0), probs.std(0)

    def configure_optimizers(self):
        return torch.optim.Adam(self.parameters(), lr=1e-3)
