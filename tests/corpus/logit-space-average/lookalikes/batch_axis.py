"""Means over the batch or time axis of a single forward pass: not an average over samples."""
import torch
from torch import nn
import torch.nn.functional as F


class FrameClassifier(nn.Module):
    """Classifies every 20 ms frame of a vibration record; (batch, frames, faults) logits."""

    def __init__(self, n_feat=64, n_faults=5):
        super().__init__()
        self.rnn = nn.GRU(n_feat, 64, batch_first=True)
        self.out = nn.Linear(64, n_faults)

    def forward(self, frames):
        h, _ = self.rnn(frames)
        return self.out(h)


def train_step(model, opt, frames, labels, log):
    logits = model(frames)
    clip_logits = logits.mean(dim=1)
    loss = F.cross_entropy(clip_logits, labels)
    opt.zero_grad()
    loss.backward()
    opt.step()
    batch_logit_mean = clip_logits.mean(dim=0)
    log({"loss": loss.item(), "class_balance": batch_logit_mean.softmax(-1).tolist()})


@torch.no_grad()
def predict_loader(model, loader):
    model.eval()
    clip_logits = torch.cat([model(frames).mean(1) for frames, _ in loader])
    return clip_logits.softmax(-1)


@torch.no_grad()
def label_shift_monitor(model, frames):
    """Average predicted class distribution over a batch of clips, compared to the training prior."""
    model.eval()
    batch_logits = model(frames).mean(1)
    return F.softmax(batch_logits.mean(0), dim=-1)
