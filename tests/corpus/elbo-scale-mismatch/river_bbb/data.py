"""Invented rainfall / stage pairs for the gauging stations."""
import torch
from torch.utils.data import DataLoader, TensorDataset


def synth_station(n, n_lags=48, seed=0):
    g = torch.Generator().manual_seed(seed)
    rain = torch.rand(n, n_lags, generator=g).pow(6) * 12.0  # mm/h, mostly dry hours
    kernel = torch.exp(-torch.arange(n_lags, dtype=torch.float32) / 9.0).flip(0)
    stage = 0.8 + 0.035 * rain @ kernel + 0.05 * torch.randn(n, generator=g)
    return rain, stage


def make_loaders(batch_size=128, n_train=12_000, n_val=2_000):
    x_tr, y_tr = synth_station(n_train, seed=1)
    x_va, y_va = synth_station(n_val, seed=2)
    train_loader = DataLoader(TensorDataset(x_tr, y_tr), batch_size=batch_size, shuffle=True)
    val_loader = DataLoader(TensorDataset(x_va, y_va), batch_size=512)
    return train_loader, val_loader
