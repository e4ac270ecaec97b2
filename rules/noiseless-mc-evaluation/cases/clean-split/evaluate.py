# MC-dropout evaluation (dropout re-enabled by the loader) and a deterministic accuracy pass over batches.
import torch
import torch.nn.functional as F

from loading import load_for_accuracy, load_model

MC_SAMPLES = 50


def mc_predict(model, x, n_samples):
    samples = []
    with torch.no_grad():
        for _ in range(n_samples):
            samples.append(F.softmax(model(x), dim=-1))
    stacked = torch.stack(samples)
    return stacked.mean(0), stacked.std(0)


def accuracy(model, batches):
    hits = []
    for xb, yb in batches:
        hits.append((model(xb).argmax(-1) == yb).float())
    return torch.cat(hits).mean()


def main(weights, x_test, batches):
    model = load_model(weights)
    mean, spread = mc_predict(model, x_test, MC_SAMPLES)
    plain = load_for_accuracy(weights)
    return mean, spread, accuracy(plain, batches)
