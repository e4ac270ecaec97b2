"""MC-dropout evaluation of the pump-bearing fault classifier.

Usage: python -m riverlab.evaluate_pumps checkpoints/pump_clf.pt
"""
import sys

import torch
from torch import nn
import torch.nn.functional as F

from .data import make_vibration_features
from .models import PumpBearingClassifier

FAULTS = ["healthy", "inner_race", "outer_race", "ball", "cage"]
CFG = {"n_bands": 32, "hidden": 128, "p_drop": 0.3, "mc_samples": 40}


def load_classifier(path, cfg=CFG):
    model = PumpBearingClassifier(cfg["n_bands"], cfg["hidden"], len(FAULTS), cfg["p_drop"])
    model.load_state_dict(torch.load(path, map_location="cpu"))
    model.eval()  # BatchNorm must use its running statistics
    return model


def enable_dropout(model):
    """Put only the dropout layers back in training mode; BatchNorm stays in eval."""
    for module in model.modules():
        if isinstance(module, nn.Dropout):
            module.train()


@torch.no_grad()
def mc_predict(model: PumpBearingClassifier, x, n_samples):
    """Predictive class probabilities and their spread over dropout masks."""
    enable_dropout(model)
    probs = torch.stack([F.softmax(model(x), dim=-1) for _ in range(n_samples)])
    return probs.mean(dim=0), probs.std(dim=0)


@torch.no_grad()
def mc_fault_vote(model: PumpBearingClassifier, x, n_samples):
    """Most likely fault per pump after averaging the dropout passes."""
    enable_dropout(model)
    logits = torch.stack([model(x) for _ in range(n_samples)])
    mean_logits = logits.mean(dim=0)
    return mean_logits.argmax(dim=-1)


def entropy(p):
    return -(p * torch.log(p.clamp_min(1e-12))).sum(dim=-1)


def main(weights):
    x_test, y_test = make_vibration_features(n=600, n_bands=CFG["n_bands"], seed=11)
    model = load_classifier(weights)

    # quick look before the full report: spread of the top-class probability per pump
    with torch.no_grad():
        draws = [F.softmax(model(x_test), dim=-1) for _ in range(CFG["mc_samples"])]
    top_spread = torch.stack(draws).max(dim=-1).values.std(dim=0)
    print(f"median spread of top-class probability: {top_spread.median():.4f}")

    mean_p, std_p = mc_predict(model, x_test, CFG["mc_samples"])
    pred = mean_p.argmax(dim=-1)
    accuracy = (pred == y_test).float().mean()
    vote = mc_fault_vote(model, x_test, CFG["mc_samples"])
    agreement = (vote == pred).float().mean()
    print(f"accuracy {accuracy:.3f}, vote/mean agreement {agreement:.3f}")
    for k, name in enumerate(FAULTS):
        sel = pred == k
        if sel.any():
            print(f"{name:>11}: n={int(sel.sum()):4d}  mean entropy {entropy(mean_p[sel]).mean():.3f}  "
                  f"mean std {std_p[sel].max(dim=-1).values.mean():.3f}")


if __name__ == "__main__":
    main(sys.argv[1] if len(sys.argv) > 1 else "checkpoints/pump_clf.pt")
