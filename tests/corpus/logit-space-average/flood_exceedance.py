"""Binary flood-exceedance classifier (stage above bankfull within 12 h?) with MC dropout."""
import torch
from torch import nn
from torch.utils.data import DataLoader, TensorDataset


class ExceedanceNet(nn.Module):
    def __init__(self, n_lags=48, hidden=64, p=0.2):
        super().__init__()
        self.body = nn.Sequential(
            nn.Linear(n_lags, hidden), nn.ReLU(), nn.Dropout(p),
            nn.Linear(hidden, hidden), nn.ReLU(), nn.Dropout(p),
        )
        self.out = nn.Linear(hidden, 1)

    def forward(self, rain):
        return self.out(self.body(rain))


def train(net, rain, exceeded, epochs=30):
    loader = DataLoader(TensorDataset(rain, exceeded.float()), batch_size=128, shuffle=True)
    criterion = nn.BCEWithLogitsLoss(pos_weight=torch.tensor(6.0))
    opt = torch.optim.Adam(net.parameters(), lr=1e-3)
    for epoch in range(epochs):
        for xb, yb in loader:
            loss = criterion(net(xb).squeeze(-1), yb)
            opt.zero_grad()
            loss.backward()
            opt.step()


def flood_probability(net, rain, n_passes=40):
    net.train()
    with torch.no_grad():
        logits = torch.stack([net(rain).squeeze(-1) for _ in range(n_passes)])
    return torch.sigmoid(logits.mean(0))


def flood_probability_mc(net, rain, n_passes=40):
    net.train()
    with torch.no_grad():
        p = torch.stack([torch.sigmoid(net(rain).squeeze(-1)) for _ in range(n_passes)])
    return p.mean(0)


if __name__ == "__main__":
    g = torch.Generator().manual_seed(4)
    rain = torch.rand(5_000, 48, generator=g).pow(6) * 15
    exceeded = rain[:, -12:].sum(1) > 25
    net = ExceedanceNet()
    train(net, rain, exceeded)
    warn = flood_probability(net, rain[:10]) > 0.3
    print(warn, flood_probability_mc(net, rain[:10]))
