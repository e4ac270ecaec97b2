# Trains the bearing classifier on invented vibration features.
import torch
from torch.utils.data import DataLoader, TensorDataset

from losses import elbo_loss
from model import BearingClassifier


def main(epochs=3):
    features = torch.randn(2_000, 32)
    labels = torch.randint(0, 5, (2_000,))
    train_loader = DataLoader(TensorDataset(features, labels), batch_size=100, shuffle=True)
    model = BearingClassifier()
    optimizer = torch.optim.Adam(model.parameters(), lr=1e-3)
    for _ in range(epochs):
        for x, y in train_loader:
            optimizer.zero_grad()
            loss = elbo_loss(model(x), y, model)
            loss.backward()
            optimizer.step()


if __name__ == "__main__":
    main()
