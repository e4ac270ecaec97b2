"""Write a per-window CSV of MC-dropout fault probabilities for the maintenance team."""
import csv

import numpy as np
import torch
from scipy.special import softmax

from .model import BearingNet
from .predict import enable_dropout
from .train import invented_windows

FAULTS = ["healthy", "inner_race", "outer_race", "ball", "cage"]


def write_report(path="reports/bearing_mc.csv", T=40):
    model = BearingNet()
    model.load_state_dict(torch.load("checkpoints/bearing_net.pt"))
    model.eval()
    enable_dropout(model)
    x, _ = invented_windows(n=200, seed=21)
    with torch.no_grad():
        samples = np.stack([model(x).cpu().numpy() for _ in range(T)])
    mean_logits = samples.mean(axis=0)
    probs = softmax(mean_logits, axis=1)
    mixture = softmax(samples, axis=2).mean(axis=0)
    with open(path, "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["window"] + FAULTS + ["max_prob_mixture"])
        for i, row in enumerate(probs):
            w.writerow([i] + [f"{p:.4f}" for p in row] + [f"{mixture[i].max():.4f}"])


if __name__ == "__main__":
    write_report()
