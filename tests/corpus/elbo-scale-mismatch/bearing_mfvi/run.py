"""Entry point: python -m bearing_mfvi.run"""
from torch.utils.data import DataLoader, random_split

from .data import invented_bearing_data
from .engine import Trainer
from .model import BearingMFVI

CONFIG = {"n_bands": 32, "n_faults": 5, "batch_size": 256, "epochs": 60, "lr": 1e-3}


def main(cfg=CONFIG):
    data = invented_bearing_data(n_bands=cfg["n_bands"])
    train_set, val_set = random_split(data, [0.85, 0.15])
    train_loader = DataLoader(train_set, batch_size=cfg["batch_size"], shuffle=True)
    val_loader = DataLoader(val_set, batch_size=1024)
    model = BearingMFVI(n_bands=cfg["n_bands"], n_faults=cfg["n_faults"])
    Trainer(model, train_loader, val_loader, lr=cfg["lr"]).fit(cfg["epochs"])
    return model


if __name__ == "__main__":
    main()
