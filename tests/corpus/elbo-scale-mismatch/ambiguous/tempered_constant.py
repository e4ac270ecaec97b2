"""AMBIGUOUS: a documented constant KL weight (tempered objective) with a mean NLL.

Issue 3 says documented tempering constants stay quiet; RULES.md only exempts weights derived
from N, and 1e-4 here is not derived from N (it happens to be close to 1/N for N = 12,000).
"""
import torch
import torch.nn.functional as F

# Tempered posterior: KL weight chosen on the 2022 validation season (see notes/tempering.md);
# deliberately not 1/N.
KL_WEIGHT = 1e-4


def train(model, loader, epochs=40):
    opt = torch.optim.Adam(model.parameters(), lr=1e-3)
    for epoch in range(epochs):
        for rain, stage in loader:
            loss = F.mse_loss(model(rain), stage) + KL_WEIGHT * model.kl()
            opt.zero_grad()
            loss.backward()
            opt.step()
