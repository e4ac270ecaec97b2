# Gauge regressor: a mean data term with the full KL; the dataset size is in scope.
import torch
import torch.nn.functional as F
from torch import nn
from torch.utils.data import DataLoader, TensorDataset


class GaugeLayer(nn.Module):
    def __init__(self):
        super().__init__()
        self.mu = nn.Parameter(torch.zeros(1, 8))
        self.log_sigma = nn.Parameter(torch.full((1, 8), -4.0))

    def forward(self, x):
        return x @ (self.mu + self.log_sigma.exp() * torch.randn_like(self.mu)).t()

    def kl(self):
        sigma = self.log_sigma.exp()
        return (0.5 * (sigma ** 2 + self.mu ** 2) - torch.log(sigma) - 0.5).sum()


rain = torch.randn(256, 8)
stage = torch.randn(256, 1)
train_loader = DataLoader(TensorDataset(rain, stage), batch_size=16, shuffle=True)
n_train = len(train_loader.dataset)
layer = GaugeLayer()
optimizer = torch.optim.Adam(layer.parameters(), lr=1e-2)
for xb, yb in train_loader:
    loss = F.mse_loss(layer(xb), yb) + layer.kl()
    optimizer.zero_grad()
    loss.backward()
    optimizer.step()
