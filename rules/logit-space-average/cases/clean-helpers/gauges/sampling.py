# Helpers returning stacks: probabilities per pass, one output per batch, passes on the second axis, a tuple.
import torch
import torch.nn.functional as F


def mc_probabilities(model, x, n_samples):
    return torch.stack([F.softmax(model(x), dim=-1) for _ in range(n_samples)])


def per_batch_logits(model, batches):
    return torch.stack([model(xb) for xb in batches])


def passes_on_second_axis(model, x, n_samples):
    return torch.stack([model(x) for _ in range(n_samples)], dim=1)


def mc_log_probs(model, x, n_samples):
    return torch.stack([F.log_softmax(model(x), dim=-1) for _ in range(n_samples)])


def stage_passes(net, rain, n_samples):
    return torch.stack([net(rain) for _ in range(n_samples)])


def logits_with_count(model, x, n_samples):
    return torch.stack([model(x) for _ in range(n_samples)]), n_samples
