"""KL weights derived from the dataset size: warm-up for mean losses, B/N for summed losses."""
import torch
import torch.nn.functional as F

CFG = {"n_train": 12_000, "batch_size": 128, "warmup_steps": 2_000, "lr": 1e-3}


def train_warmup(model, loader, epochs=40, cfg=CFG):
    opt = torch.optim.Adam(model.parameters(), lr=cfg["lr"])
    step = 0
    for epoch in range(epochs):
        for rain, stage in loader:
            beta = min(1.0, step / cfg["warmup_steps"]) / cfg["n_train"]
            nll = F.mse_loss(model(rain), stage)
            loss = nll + beta * model.kl()
            opt.zero_grad()
            loss.backward()
            opt.step()
            step += 1


def train_summed(model, loader, epochs=40, cfg=CFG):
    kl_scale = cfg["batch_size"] / cfg["n_train"]
    opt = torch.optim.Adam(model.parameters(), lr=cfg["lr"])
    for epoch in range(epochs):
        for rain, stage in loader:
            sse = F.mse_loss(model(rain), stage, reduction="sum")
            loss = sse + kl_scale * model.kl()
            opt.zero_grad()
            loss.backward()
            opt.step()
