# Leaf-spectrum classifier and gauge regressor in PyTorch: the data term written many ways, each with an unscaled KL.
import torch
import torch.distributions as D
from torch import nn
from torch.nn import functional as fn
from torch.utils.data import DataLoader, TensorDataset


class SpectrumVariationalNet(nn.Module):
    def __init__(self, n_bands=64, n_classes=4):
        super().__init__()
        self.loc = nn.Parameter(torch.zeros(n_classes, n_bands))
        self.log_scale = nn.Parameter(torch.full((n_classes, n_bands), -3.0))
        self.noise_log_std = nn.Parameter(torch.tensor(-2.0))

    def forward(self, spectra):
        weight = self.loc + self.log_scale.exp() * torch.randn_like(self.loc)
        return spectra @ weight.t()

    def kl_to_prior(self):
        posterior = D.Normal(self.loc, self.log_scale.exp())
        prior = D.Normal(0.0, 1.0)
        return D.kl_divergence(posterior, prior).sum()


spectra = torch.rand(900, 64)
condition = torch.randint(0, 4, (900,))
reflectance = torch.rand(900, 4)
leaf_loader = DataLoader(TensorDataset(spectra, condition, reflectance), batch_size=30, shuffle=True)
net = SpectrumVariationalNet()
optimizer = torch.optim.Adam(net.parameters(), lr=3e-3)
nll_module = nn.NLLLoss()


def train_epoch():
    for x, label, target in leaf_loader:
        optimizer.zero_grad()
        logits = net(x)
        # A loss module with its default reduction ('mean').
        loss_a = nll_module(fn.log_softmax(logits, dim=1), label) + net.kl_to_prior()  # expect[elbo-scale-mismatch]
        # A hand-written categorical likelihood, averaged over the batch.
        one_hot = fn.one_hot(label, 4).float()
        categorical_nll = -(one_hot * torch.log_softmax(logits, -1)).sum(-1).mean()
        loss_b = categorical_nll + net.kl_to_prior()  # expect[elbo-scale-mismatch]
        # A hand-written Gaussian likelihood, averaged over the batch.
        sigma = net.noise_log_std.exp()
        gaussian_nll = torch.mean(0.5 * ((target - logits) / sigma) ** 2 + torch.log(sigma))
        loss_c = gaussian_nll + net.kl_to_prior()  # expect[elbo-scale-mismatch]
        # The negative log-probability of a distribution over the targets.
        loss_d = -D.Normal(logits, sigma).log_prob(target).mean() + net.kl_to_prior()  # expect[elbo-scale-mismatch]
        (loss_a + loss_b + loss_c + loss_d).backward()
        optimizer.step()
