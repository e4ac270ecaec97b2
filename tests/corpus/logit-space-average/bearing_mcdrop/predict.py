"""MC-dropout prediction helpers."""
import torch
import torch.nn.functional as F


def enable_dropout(model):
    for m in model.modules():
        if isinstance(m, torch.nn.Dropout):
            m.train()


@torch.no_grad()
def mc_predict(model, x, n_samples=30):
    """Predictive class probabilities, shape (batch, n_faults)."""
    model.eval()
    enable_dropout(model)
    logits = torch.stack([model(x) for _ in range(n_samples)])
    return logits.mean(0).softmax(-1)


@torch.no_grad()
def mc_predict_with_spread(model, x, n_samples=30):
    model.eval()
    enable_dropout(model)
    probs = torch.stack([F.softmax(model(x), dim=-1) for _ in range(n_samples)])
    return probs.mean(0), probs.std(0)
