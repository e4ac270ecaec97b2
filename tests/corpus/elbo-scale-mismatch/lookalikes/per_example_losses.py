"""Per-example losses reduced by hand; both reductions paired with the matching KL scale."""
import torch
import torch.nn.functional as F
from torch.utils.data import DataLoader


def train_mean(model, train_ds, epochs=30, batch_size=256):
    loader = DataLoader(train_ds, batch_size=batch_size, shuffle=True)
    opt = torch.optim.Adam(model.parameters(), lr=1e-3)
    for epoch in range(epochs):
        for x, y in loader:
            per_example = F.cross_entropy(model(x), y, reduction="none")
            loss = per_example.mean() + model.kl() / len(train_ds)
            opt.zero_grad()
            loss.backward()
            opt.step()


def train_sum_rescaled(model, train_ds, epochs=30, batch_size=256):
    loader = DataLoader(train_ds, batch_size=batch_size, shuffle=True)
    opt = torch.optim.Adam(model.parameters(), lr=1e-4)
    for epoch in range(epochs):
        for x, y in loader:
            per_example = F.cross_entropy(model(x), y, reduction="none")
            data_term = per_example.sum() * len(train_ds) / x.shape[0]
            loss = data_term + model.kl()
            opt.zero_grad()
            loss.backward()
            opt.step()
