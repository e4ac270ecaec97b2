"""Ensemble-of-draws forecast for the flood bulletin (spread shown as a band)."""
import torch

from .model import StageGRU


def forecast(ckpt, rain, n_draws=100):
    model = StageGRU()
    model.load_state_dict(torch.load(ckpt))
    model.train(False)
    draws = []
    with torch.no_grad():
        for _ in range(n_draws):
            draws.append(model(rain))
    draws = torch.stack(draws)
    return draws.mean(0), draws.quantile(0.05, dim=0), draws.quantile(0.95, dim=0)


if __name__ == "__main__":
    rain = torch.rand(1, 72, 3).pow(5) * 10
    mean, lo, hi = forecast("checkpoints/stage_gru.pt", rain)
    print(mean, lo, hi)
