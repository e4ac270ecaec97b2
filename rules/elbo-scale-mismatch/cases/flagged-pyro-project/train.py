# Fits the probe drift model to a season of invented readings, 512 at a time.
import torch
from torch.utils.data import DataLoader, TensorDataset

from fitting import fit
from model import drift_model


def main():
    day = torch.rand(20_000) * 180.0
    probe = torch.randint(0, 24, (20_000,))
    moisture = 0.25 + 2e-4 * day + 0.01 * torch.randn(20_000)
    fit(drift_model, DataLoader(TensorDataset(day, probe, moisture), batch_size=512, shuffle=True))


if __name__ == "__main__":
    main()
