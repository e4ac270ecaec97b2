# MC-dropout evaluation of the pump-bearing classifier on the held-out vibration spectra.
import numpy as np
import torch
import torch.nn.functional as F

from loading import load_model

MC_SAMPLES = 50


def mc_predict(model, x, n_samples):
    """Predictive probabilities and their spread over dropout masks."""
    samples = []
    with torch.no_grad():
        for _ in range(n_samples):
            samples.append(F.softmax(model(x), dim=-1))  # expect[noiseless-mc-evaluation]
    stacked = torch.stack(samples)
    return stacked.mean(0), stacked.std(0)


def disagreement(model, x):
    votes = np.stack([model(x).argmax(-1).numpy() for _ in range(MC_SAMPLES)])  # expect[noiseless-mc-evaluation]
    return (votes != votes[0]).mean()


def main(weights, x_test):
    model = load_model(weights)
    mean, spread = mc_predict(model, x_test, MC_SAMPLES)
    print("mean top-class std", spread.max(-1).values.mean().item())
    print("vote disagreement", disagreement(model, x_test))
    return mean
