"""Ablation of the KL weighting for the heteroscedastic gauge model (station 07, invented data).

Each --kl-mode is one row of the table in the lab notes.
"""
import argparse

import torch
from torch import nn
import torch.nn.functional as F
from torch.utils.data import DataLoader, TensorDataset

from river_bbb.layers import BayesLinear


class HeteroGauge(nn.Module):
    def __init__(self, n_lags=48, n_hidden=32):
        super().__init__()
        self.body = BayesLinear(n_lags, n_hidden)
        self.head = BayesLinear(n_hidden, 2)

    def forward(self, x):
        mu, raw_var = self.head(torch.tanh(self.body(x))).unbind(-1)
        return mu, F.softplus(raw_var) + 1e-4

    def kl(self):
        return self.body.kl() + self.head.kl()


def main():
    p = argparse.ArgumentParser()
    p.add_argument("--kl-mode", default="per-batch",
                   choices=["scaled-nll", "per-batch", "full", "per-example", "mean-per-batch"])
    p.add_argument("--batch-size", type=int, default=64)
    p.add_argument("--epochs", type=int, default=30)
    args = p.parse_args()

    x_train = torch.load("data/station07_rain.pt")
    y_train = torch.load("data/station07_stage.pt")
    n_train = x_train.shape[0]
    loader = DataLoader(TensorDataset(x_train, y_train), batch_size=args.batch_size, shuffle=True)
    num_batches = len(loader)

    model = HeteroGauge(n_lags=x_train.shape[1])
    opt = torch.optim.Adam(model.parameters(), lr=2e-3)
    for epoch in range(args.epochs):
        for xb, yb in loader:
            mu, var = model(xb)
            nll_sum = F.gaussian_nll_loss(mu, yb, var, reduction="sum")
            kl = model.kl()
            if args.kl_mode == "scaled-nll":
                loss = nll_sum * (n_train / xb.shape[0]) + kl
            elif args.kl_mode == "per-batch":
                loss = nll_sum + kl / num_batches
            elif args.kl_mode == "full":
                loss = nll_sum + kl
            elif args.kl_mode == "per-example":
                loss = nll_sum + kl / n_train
            else:
                loss = nll_sum / xb.shape[0] + kl / num_batches
            opt.zero_grad()
            loss.backward()
            opt.step()
        print(epoch, loss.item())


if __name__ == "__main__":
    main()
