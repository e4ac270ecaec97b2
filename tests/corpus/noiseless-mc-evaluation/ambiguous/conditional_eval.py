"""AMBIGUOUS: eval() only on one branch of a command-line flag.

On the path where --deterministic is given the samples are identical; on the default path they
are not. RULES.md does not say whether "on the path" means some path or every path.
"""
import argparse

import torch
from torch import nn


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--deterministic", action="store_true")
    args = ap.parse_args()
    model = nn.Sequential(nn.Linear(48, 64), nn.ReLU(), nn.Dropout(0.1), nn.Linear(64, 1))
    model.load_state_dict(torch.load("checkpoints/stage_mlp.pt"))
    if args.deterministic:
        model.eval()
    x = torch.rand(32, 48)
    with torch.no_grad():
        samples = torch.stack([model(x) for _ in range(100)])
    print(samples.mean(0), samples.std(0))


if __name__ == "__main__":
    main()
