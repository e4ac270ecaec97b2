# Trains the stage forecaster and logs the validation ELBO.
import torch
from torch.utils.data import DataLoader, TensorDataset

from layers import StageNet
from objectives import elbo_loss, summed_elbo


def main(epochs=3):
    rain, stage = torch.randn(1_500, 24), torch.randn(1_500, 6)
    train_loader = DataLoader(TensorDataset(rain[:1_200], stage[:1_200]), batch_size=60, shuffle=True)
    val_loader = DataLoader(TensorDataset(rain[1_200:], stage[1_200:]), batch_size=300)
    model = StageNet()
    optimizer = torch.optim.Adam(model.parameters(), lr=1e-3)
    for epoch in range(epochs):
        for x, y in train_loader:
            optimizer.zero_grad()
            loss = elbo_loss(model(x), y, model, len(train_loader.dataset))
            loss.backward()
            optimizer.step()
        print(epoch, float(summed_elbo(model, val_loader)))


if __name__ == "__main__":
    main()
