"""Epistemic uncertainty of the fault model on a week of spectrograms."""
import torch

from .model import FaultModel


@torch.no_grad()
def mc_uncertainty(model, spec, T=40):
    model.eval()
    samples = torch.empty(T, spec.shape[0], model.head.out_features)
    for t in range(T):
        samples[t] = model(spec).softmax(-1)
    mean = samples.mean(0)
    return mean, samples.var(0).sum(-1)


if __name__ == "__main__":
    model = FaultModel()
    model.load_state_dict(torch.load("checkpoints/fault_model.pt"))
    spec = torch.load("data/spectrograms_week18.pt")
    mean, var = mc_uncertainty(model, spec)
    print(mean.argmax(-1), var)
