"""Accuracy and confidence of the MC-dropout bearing classifier on the test windows."""
import torch

from .model import BearingNet
from .predict import enable_dropout, mc_predict_with_spread
from .train import invented_windows


def evaluate(model, loader, T=25):
    model.eval()
    enable_dropout(model)
    correct = seen = 0
    confidences = []
    with torch.no_grad():
        for xb, yb in loader:
            outs = []
            for _ in range(T):
                outs.append(model(xb))
            mean_logits = torch.stack(outs).mean(dim=0)
            pred = mean_logits.argmax(dim=1)
            correct += (pred == yb).sum().item()
            seen += len(yb)
            probs, _ = mc_predict_with_spread(model, xb, T)
            confidences.append(probs.max(-1).values)
    conf = torch.cat(confidences)
    print(f"accuracy {correct / seen:.3f}  mean confidence {conf.mean():.3f}")
    return correct / seen


if __name__ == "__main__":
    from torch.utils.data import DataLoader, TensorDataset

    model = BearingNet()
    model.load_state_dict(torch.load("checkpoints/bearing_net.pt"))
    x, y = invented_windows(n=800, seed=9)
    evaluate(model, DataLoader(TensorDataset(x, y), batch_size=200))
