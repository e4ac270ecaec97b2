"""Deep ensemble of leaf-spectrum classifiers: members in eval mode, one pass each."""
import torch
from torch import nn
from torch.utils.data import DataLoader


class LeafMLP(nn.Module):
    def __init__(self, n_bands=120, n_classes=4):
        super().__init__()
        self.net = nn.Sequential(nn.Linear(n_bands, 96), nn.ReLU(), nn.Dropout(0.3), nn.Linear(96, n_classes))

    def forward(self, x):
        return self.net(x)


def load_members(paths):
    members = []
    for path in paths:
        m = LeafMLP()
        m.load_state_dict(torch.load(path))
        m.eval()
        members.append(m)
    return members


@torch.no_grad()
def ensemble_predict(members, x):
    probs = torch.stack([m(x).softmax(-1) for m in members])
    return probs.mean(0), probs.var(0).sum(-1)


@torch.no_grad()
def test_accuracy(model, dataset):
    model.eval()
    correct = 0
    for x, y in DataLoader(dataset, batch_size=256):
        correct += (model(x).argmax(-1) == y).sum().item()
    return correct / len(dataset)


@torch.no_grad()
def per_batch_losses(model, loader):
    model.eval()
    losses = [nn.functional.cross_entropy(model(x), y) for x, y in loader]
    return torch.stack(losses).mean(), torch.stack(losses).std()


if __name__ == "__main__":
    members = load_members([f"checkpoints/leaf_member_{k}.pt" for k in range(5)])
    x = torch.rand(8, 120)
    print(ensemble_predict(members, x))
