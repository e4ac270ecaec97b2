"""Prior-scale sweep for the bearing classifier (per-datum ELBO)."""
import torch
from torch.utils.data import DataLoader, random_split

from .data import invented_bearing_data
from .losses import elbo_loss_per_datum
from .model import BearingMFVI


def sweep(prior_scales=(0.1, 0.3, 1.0), epochs=40, batch_size=128):
    train_set, val_set = random_split(invented_bearing_data(), [0.85, 0.15])
    train_loader = DataLoader(train_set, batch_size=batch_size, shuffle=True)
    results = {}
    for prior_scale in prior_scales:
        model = BearingMFVI(prior_scale=prior_scale)
        opt = torch.optim.Adam(model.parameters(), lr=1e-3)
        for epoch in range(epochs):
            for xb, yb in train_loader:
                loss = elbo_loss_per_datum(model(xb), yb, model.kl(), len(train_set))
                opt.zero_grad()
                loss.backward()
                opt.step()
        xv, yv = val_set[:]
        with torch.no_grad():
            results[prior_scale] = (model(xv).argmax(-1) == yv).float().mean().item()
    return results


if __name__ == "__main__":
    print(sweep())
