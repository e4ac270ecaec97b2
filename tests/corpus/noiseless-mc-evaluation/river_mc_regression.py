"""MC-dropout river-stage regression: train, then report predictive mean and spread on validation."""
import torch
from torch import nn
import torch.nn.functional as F


class StageNet(nn.Module):
    def __init__(self, n_lags=48, hidden=64, p=0.1):
        super().__init__()
        self.l1 = nn.Linear(n_lags, hidden)
        self.l2 = nn.Linear(hidden, hidden)
        self.out = nn.Linear(hidden, 1)
        self.p = p

    def forward(self, x):
        h = F.dropout(F.relu(self.l1(x)), self.p, training=self.training)
        h = F.dropout(F.relu(self.l2(h)), self.p, training=self.training)
        return self.out(h).squeeze(-1)


def invented_record(n, seed):
    g = torch.Generator().manual_seed(seed)
    rain = torch.rand(n, 48, generator=g).pow(6) * 12
    return rain, 0.7 + 0.03 * rain[:, -12:].sum(1) + 0.04 * torch.randn(n, generator=g)


def main():
    x_tr, y_tr = invented_record(4_000, 1)
    x_val, y_val = invented_record(500, 2)
    net = StageNet()
    opt = torch.optim.Adam(net.parameters(), lr=1e-3, weight_decay=1e-5)
    for epoch in range(300):
        net.train()
        loss = F.mse_loss(net(x_tr), y_tr)
        opt.zero_grad()
        loss.backward()
        opt.step()

    net.eval()
    with torch.no_grad():
        val_rmse = (net(x_val) - y_val).pow(2).mean().sqrt()
        samples = torch.stack([net(x_val) for _ in range(200)])
    mu, sd = samples.mean(0), samples.std(0)
    coverage = ((y_val - mu).abs() < 1.96 * sd).float().mean()
    print(f"val rmse {val_rmse:.3f}  95% interval coverage {coverage:.2%}")


if __name__ == "__main__":
    main()
