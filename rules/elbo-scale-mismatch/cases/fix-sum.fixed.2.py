# Leaf-spectrum classifier: a summed data term with the full KL on every batch.
import torch
import torch.nn.functional as F
from torch import nn
from torch.utils.data import DataLoader, TensorDataset


class SpectrumHead(nn.Module):
    def __init__(self):
        super().__init__()
        self.w_mu = nn.Parameter(torch.zeros(4, 64))
        self.w_log_var = nn.Parameter(torch.full((4, 64), -9.0))

    def forward(self, x):
        return x @ (self.w_mu + torch.exp(0.5 * self.w_log_var) * torch.randn_like(self.w_mu)).t()

    def kl(self):
        return -0.5 * torch.sum(1 + self.w_log_var - self.w_mu.pow(2) - self.w_log_var.exp())


spectra = torch.rand(360, 64)
condition = torch.randint(0, 4, (360,))
leaf_loader = DataLoader(TensorDataset(spectra, condition), batch_size=36, shuffle=True)
n_spectra = spectra.shape[0]
head = SpectrumHead()
optimizer = torch.optim.Adam(head.parameters(), lr=1e-3)
for x, y in leaf_loader:
    loss = F.cross_entropy(head(x), y, reduction="sum") * n_spectra / y.shape[0] + head.kl()
    optimizer.zero_grad()
    loss.backward()
    optimizer.step()
