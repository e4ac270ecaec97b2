"""Compare free and capped alpha on the invented gauge-3 record."""
import torch
import torch.nn.functional as F

from .model import StageVDNet

CONFIG = {"layers": ["free", "capped"], "epochs": 300, "lr": 2e-3}


def run(cfg=CONFIG):
    g = torch.Generator().manual_seed(3)
    rain = torch.rand(2_000, 48, generator=g).pow(6) * 12
    stage = 0.7 + 0.03 * rain[:, -12:].sum(1)
    for kind in cfg["layers"]:
        net = StageVDNet(layer=kind)
        opt = torch.optim.Adam(net.parameters(), lr=cfg["lr"])
        for _ in range(cfg["epochs"]):
            loss = F.mse_loss(net(rain), stage)
            opt.zero_grad()
            loss.backward()
            opt.step()
        print(kind, loss.item())


if __name__ == "__main__":
    run()
