# Look-alikes of a vectorised MC sample axis for a classifier: batch-folded copies unfolded the wrong way, means over
# other axes, probabilities averaged, different inputs stacked, and a library function of the copies.
import torch
import torch.nn.functional as F
from torch import nn


class BearingMLP(nn.Module):
    """Band energies -> fault logits; dropout stays on at prediction time (MC dropout)."""

    def __init__(self, n_bands=16, hidden=32, n_faults=5):
        super().__init__()
        self.fc = nn.Linear(n_bands, hidden)
        self.head = nn.Linear(hidden, n_faults)

    def forward(self, x):
        return self.head(F.dropout(torch.relu(self.fc(x)), 0.3, training=True))


def folded_mean(model, x, n_samples=10):
    # No unfolding: the mean runs over all T·B rows at once.
    return F.softmax(model(x.repeat(n_samples, 1)).mean(0), dim=-1)


def wrong_unfold(model, x, n_samples=10):
    # x.repeat stacks whole batches, so rows b·T … b·T+T−1 are different examples, not copies of one.
    logits = model(x.repeat(n_samples, 1)).view(x.shape[0], n_samples, -1)
    return F.softmax(logits.mean(1), dim=-1)


def wrong_unfold_interleaved(model, x, n_samples=10):
    # repeat_interleave keeps each example's copies together, so the first axis after this view is not the samples.
    logits = model(x.repeat_interleave(n_samples, dim=0)).view(n_samples, x.shape[0], -1)
    return F.softmax(logits.mean(0), dim=-1)


def probabilities_averaged(model, x, n_samples=10):
    probs = F.softmax(model(x.unsqueeze(0).expand(n_samples, -1, -1)), dim=-1)
    return probs.mean(0)


def batch_axis_mean(model, x, n_samples=10):
    # The copies are on axis 0; the mean over axis 1 is over the batch.
    logits = model(x.unsqueeze(0).expand(n_samples, -1, -1))
    return F.softmax(logits.mean(1), dim=-1)


def copies_on_second_axis(model, x, n_samples=10):
    # The copies are stacked on axis 1; the mean over axis 0 is over the batch.
    logits = model(torch.stack([x] * n_samples, dim=1))
    return F.softmax(logits.mean(0), dim=-1)


def augmented_views(model, x):
    # Two different inputs (a test-time augmentation), not copies of one.
    logits = model(torch.stack([x, x.flip(-1)]))
    return F.softmax(logits.mean(0), dim=-1)


def deterministic_copies(x, n_samples=10):
    # A library function of the copies is not a model.
    return F.softmax(torch.tanh(x.unsqueeze(0).expand(n_samples, -1, -1)).mean(0), dim=-1)
