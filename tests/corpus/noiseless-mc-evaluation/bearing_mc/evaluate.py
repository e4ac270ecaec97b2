"""python -m bearing_mc.evaluate --ckpt checkpoints/bearing_cnn.pt --samples 50"""
import argparse

import torch

from .checkpoint import load_model
from .uncertainty import mc_probs, mc_probs_dropout_on, summarise


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--ckpt", default="checkpoints/bearing_cnn.pt")
    ap.add_argument("--samples", type=int, default=50)
    ap.add_argument("--mode", choices=["plain", "dropout-on"], default="plain")
    args = ap.parse_args()

    model = load_model(args.ckpt, p_drop=0.3)
    x_test = torch.load("data/bearing_test_windows.pt")
    if args.mode == "plain":
        probs = mc_probs(model, x_test, T=args.samples)
    else:
        probs = mc_probs_dropout_on(model, x_test, T=args.samples)
    mean, entropy, mi = summarise(probs)
    print("accuracy proxy", mean.max(-1).values.mean().item())
    print("mean mutual information", mi.mean().item())


if __name__ == "__main__":
    main()
