"""Fine-tune the trained river-stage net on a station with a short record (2 seasons)."""
import torch
import torch.nn.functional as F

from .data import make_loaders
from .model import RiverStageNet


def finetune(ckpt="checkpoints/river_bbb.pt", epochs=15, lr=3e-4):
    train_loader, _ = make_loaders(batch_size=64, n_train=1_500)
    model = RiverStageNet()
    model.load_state_dict(torch.load(ckpt))
    opt = torch.optim.Adam(model.parameters(), lr=lr)
    for epoch in range(epochs):
        for rain, stage in train_loader:
            opt.zero_grad()
            pred = model(rain)
            loss = F.mse_loss(pred, stage) + model.kl() / len(train_loader.dataset)
            loss.backward()
            opt.step()
    return model


if __name__ == "__main__":
    finetune()
