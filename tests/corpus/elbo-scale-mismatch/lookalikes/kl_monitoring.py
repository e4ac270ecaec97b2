"""Deterministic-mean pretraining of the river-stage net: the KL is only logged, not optimised."""
import torch
import torch.nn.functional as F


def pretrain_means(model, loader, epochs=5, log=print):
    """Warm start: fit the posterior means with the plain MSE before switching on the ELBO."""
    opt = torch.optim.Adam([p for n, p in model.named_parameters() if n.endswith("mu")], lr=1e-3)
    for epoch in range(epochs):
        for rain, stage in loader:
            pred = model(rain)
            mse = F.mse_loss(pred, stage)
            kl = model.kl()
            opt.zero_grad()
            mse.backward()
            opt.step()
        log({"epoch": epoch, "mse": mse.item(), "kl": kl.item(), "mse_plus_kl": (mse + kl).item()})


@torch.no_grad()
def report_bound(model, loader):
    """Per-example negative bound on held-out data, for the run summary only."""
    kl = model.kl()
    total, n = 0.0, 0
    for rain, stage in loader:
        nll = F.gaussian_nll_loss(model(rain), stage, torch.full_like(stage, 0.01))
        total += (nll + kl).item() * len(stage)
        n += len(stage)
    return total / n
