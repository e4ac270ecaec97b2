# MC evaluation of two pump classifiers in eval mode: one with nn.Dropout, one with functional dropout.
import torch
import torch.nn.functional as F
from torch import nn


class PumpNet(nn.Module):
    def __init__(self, n_bands=32, n_faults=5):
        super().__init__()
        self.body = nn.Sequential(nn.Linear(n_bands, 64), nn.BatchNorm1d(64), nn.ReLU(), nn.Dropout(0.3), nn.AlphaDropout(0.1))
        self.head = nn.Linear(64, n_faults)

    def forward(self, x):
        return self.head(self.body(x))


class SpectrumNet(nn.Module):
    def __init__(self, n_bands=32, n_faults=5):
        super().__init__()
        self.norm = nn.BatchNorm1d(n_bands)
        self.fc = nn.Linear(n_bands, n_faults)

    def forward(self, x):
        return self.fc(F.dropout(self.norm(x), p=0.2, training=self.training))


def mc_predict(x, n_samples=30):
    model = PumpNet()
    model.eval()
    for module in model.modules():
        if isinstance(module, (nn.AlphaDropout, nn.Dropout)):
            module.train()
    probs = torch.stack([F.softmax(model(x), dim=-1) for _ in range(n_samples)])
    return probs.mean(0), probs.std(0)


def mc_spectrum(x, n_samples=30):
    net = SpectrumNet()
    net.eval()
    with torch.no_grad():
        outs = []
        for module in net.modules():
            if isinstance(module, SpectrumNet):
                module.training = True
        for _ in range(n_samples):
            outs.append(net(x))
    return torch.stack(outs).std(0)
