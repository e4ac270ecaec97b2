"""Minimal trainer for the bearing MFVI experiments."""
import torch
import torch.nn.functional as F

from .losses import elbo_loss


class Trainer:
    def __init__(self, model, train_loader, val_loader, lr=1e-3, device="cpu"):
        self.model = model.to(device)
        self.train_loader = train_loader
        self.val_loader = val_loader
        self.opt = torch.optim.Adam(model.parameters(), lr=lr)
        self.device = device

    def training_step(self, batch):
        x, y = (t.to(self.device) for t in batch)
        logits = self.model(x)
        loss = elbo_loss(logits, y, self.model.kl(), x.size(0))
        self.opt.zero_grad()
        loss.backward()
        self.opt.step()
        return loss.item()

    @torch.no_grad()
    def validate(self):
        kl = self.model.kl()
        total, correct, seen = 0.0, 0, 0
        for x, y in self.val_loader:
            x, y = x.to(self.device), y.to(self.device)
            logits = self.model(x)
            neg_elbo = F.cross_entropy(logits, y) + kl
            total += neg_elbo.item() * len(y)
            correct += (logits.argmax(-1) == y).sum().item()
            seen += len(y)
        return total / seen, correct / seen

    def fit(self, epochs):
        for epoch in range(epochs):
            self.model.train()
            losses = [self.training_step(b) for b in self.train_loader]
            val_elbo, val_acc = self.validate()
            print(f"{epoch:3d} train {sum(losses) / len(losses):.4f} val {val_elbo:.4f} acc {val_acc:.3f}")
