"""Posterior predictive by weight sampling; eval mode only freezes the deterministic parts."""
import torch

from .models import PumpBNN, PumpHybrid


@torch.no_grad()
def posterior_predictive(model, x, n_samples=64):
    model.eval()
    probs = torch.stack([model(x).softmax(-1) for _ in range(n_samples)])
    return probs.mean(0), probs.std(0)


if __name__ == "__main__":
    x = torch.randn(16, 32)
    for cls, ckpt in ((PumpBNN, "checkpoints/pump_bnn.pt"), (PumpHybrid, "checkpoints/pump_hybrid.pt")):
        model = cls()
        model.load_state_dict(torch.load(ckpt))
        mean, sd = posterior_predictive(model, x)
        print(cls.__name__, sd.max().item())
