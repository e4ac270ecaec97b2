"""Per-pump predictive spread of the fault probabilities."""
import torch

from .eval_utils import batched_forward, freeze, mc_forward
from .net import PumpSNN


def main(ckpt="checkpoints/pump_snn.pt", T=30):
    net = PumpSNN()
    net.load_state_dict(torch.load(ckpt))
    net = freeze(net)
    x = torch.load("data/pump_features_2024w18.pt")
    logits = batched_forward(net, x)
    outs = mc_forward(net, x, T)
    probs = torch.stack(outs).softmax(-1)
    spread = probs.std(0).max(-1).values
    for pump, (p, s) in enumerate(zip(logits.softmax(-1), spread)):
        print(pump, p.argmax().item(), f"{s:.3f}")


if __name__ == "__main__":
    main()
