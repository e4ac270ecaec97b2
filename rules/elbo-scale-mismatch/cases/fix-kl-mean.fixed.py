# Gauge regressor: the KL is averaged over the weights instead of summed (the dataset scaling is right).
import torch
import torch.nn.functional as F
from torch import nn
from torch.distributions import Normal, kl_divergence
from torch.utils.data import DataLoader, TensorDataset


class GaugeLayer(nn.Module):
    def __init__(self):
        super().__init__()
        self.mu = nn.Parameter(torch.zeros(1, 12))
        self.rho = nn.Parameter(torch.full((1, 12), -5.0))

    def forward(self, x):
        return x @ (self.mu + F.softplus(self.rho) * torch.randn_like(self.mu)).t()

    def kl(self):
        return kl_divergence(Normal(self.mu, F.softplus(self.rho)), Normal(0.0, 1.0)).sum()


rain = torch.randn(300, 12)
stage = torch.randn(300, 1)
loader = DataLoader(TensorDataset(rain, stage), batch_size=20, shuffle=True)
layer = GaugeLayer()
optimizer = torch.optim.Adam(layer.parameters(), lr=1e-2)
for xb, yb in loader:
    loss = F.mse_loss(layer(xb), yb) + layer.kl() / len(loader.dataset)
    optimizer.zero_grad()
    loss.backward()
    optimizer.step()
