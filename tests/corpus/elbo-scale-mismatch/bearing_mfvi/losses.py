"""Loss helpers shared by the bearing experiments."""
import torch.nn.functional as F


def elbo_loss(logits, targets, kl, batch_size):
    """Negative ELBO, per example."""
    return F.cross_entropy(logits, targets) + kl / batch_size


def elbo_loss_per_datum(logits, targets, kl, n_data):
    """Negative ELBO divided by the number of training examples."""
    return F.cross_entropy(logits, targets) + kl / n_data
