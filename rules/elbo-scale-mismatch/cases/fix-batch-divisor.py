# Bearing classifier: the KL divided by the batch size instead of the dataset size.
import torch
import torch.nn.functional as F
from torch import nn
from torch.utils.data import DataLoader, TensorDataset


class BearingHead(nn.Module):
    def __init__(self):
        super().__init__()
        self.w_mu = nn.Parameter(torch.zeros(5, 16))
        self.w_rho = nn.Parameter(torch.full((5, 16), -5.0))

    def forward(self, x):
        sigma = F.softplus(self.w_rho)
        return x @ (self.w_mu + sigma * torch.randn_like(sigma)).t()

    def kl(self):
        sigma = F.softplus(self.w_rho)
        return (0.5 * (sigma ** 2 + self.w_mu ** 2) - torch.log(sigma) - 0.5).sum()


def train(epochs=2):
    features = torch.randn(500, 16)
    labels = torch.randint(0, 5, (500,))
    pump_loader = DataLoader(TensorDataset(features, labels), batch_size=25, shuffle=True)
    head = BearingHead()
    optimizer = torch.optim.Adam(head.parameters(), lr=1e-3)
    for _ in range(epochs):
        for x, y in pump_loader:
            nll = F.cross_entropy(head(x), y)
            kl = head.kl() / x.size(0)
            loss = nll + kl
            optimizer.zero_grad()
            loss.backward()
            optimizer.step()
