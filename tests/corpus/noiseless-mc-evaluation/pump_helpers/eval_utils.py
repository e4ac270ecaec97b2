"""Small helpers shared by the pump notebooks and scripts."""
import torch


def freeze(model):
    """Inference mode: no grads, no training-time behaviour."""
    model.train(False)
    for p in model.parameters():
        p.requires_grad_(False)
    return model


def mc_forward(model, x, T):
    return [model(x) for _ in range(T)]


def batched_forward(model, x, batch_size=1024):
    return torch.cat([model(x[i:i + batch_size]) for i in range(0, len(x), batch_size)])
