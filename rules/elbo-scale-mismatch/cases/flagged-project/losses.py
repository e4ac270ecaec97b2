# The training objective, shared by the training scripts.
import torch.nn.functional as F


def elbo_loss(logits, labels, model):
    """Negative ELBO for one minibatch."""
    return F.cross_entropy(logits, labels) + model.kl()  # expect[elbo-scale-mismatch]
