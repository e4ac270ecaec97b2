"""Distil the MC-dropout bearing classifier (teacher) into a small deterministic student."""
import torch
from torch import nn
import torch.nn.functional as F


class Student(nn.Module):
    def __init__(self, n_bands=32, n_faults=5):
        super().__init__()
        self.net = nn.Sequential(nn.Linear(n_bands, 32), nn.ReLU(), nn.Linear(32, n_faults))

    def forward(self, x):
        return self.net(x)


def distill(teacher, loader, epochs=20, temperature=4.0, alpha=0.7):
    student = Student()
    opt = torch.optim.Adam(student.parameters(), lr=2e-3)
    teacher.train()  # dropout on: soft targets averaged over passes
    for epoch in range(epochs):
        for xb, yb in loader:
            with torch.no_grad():
                soft = torch.stack([F.softmax(teacher(xb) / temperature, -1) for _ in range(8)]).mean(0)
            logits = student(xb)
            ce = F.cross_entropy(logits, yb)
            kd = F.kl_div(F.log_softmax(logits / temperature, -1), soft, reduction="batchmean")
            loss = (1 - alpha) * ce + alpha * temperature ** 2 * kd
            opt.zero_grad()
            loss.backward()
            opt.step()
    return student
