# River-stage forecaster: MC samples of a regression network, averaged as values (correctly).
import torch
import torch.nn.functional as F
from torch import nn
from torch.distributions import Normal


class StageForecaster(nn.Module):
    """Rainfall window -> stage (m) at each of six gauging stations."""

    def __init__(self, window=24, n_stations=6, p_drop=0.1):
        super().__init__()
        self.body = nn.Sequential(nn.Linear(window, 32), nn.ReLU(), nn.Dropout(p_drop))
        self.out = nn.Linear(32, n_stations)

    def forward(self, rain):
        return self.out(self.body(rain))


class StageEnsembleMember(nn.Module):
    """Mean and log-variance of the stage at one station."""

    def __init__(self, window=24):
        super().__init__()
        self.body = nn.Sequential(nn.Linear(window, 32), nn.ReLU())
        self.mean = nn.Linear(32, 1)
        self.log_var = nn.Linear(32, 1)

    def forward(self, rain):
        h = self.body(rain)
        return self.mean(h), self.log_var(h)


def train_step(model: StageForecaster, rain, stage, optimiser):
    loss = F.mse_loss(model(rain), stage)
    optimiser.zero_grad()
    loss.backward()
    optimiser.step()
    return loss


def predictive_band(model: StageForecaster, rain, n_samples=50):
    model.train()
    samples = torch.stack([model(rain) for _ in range(n_samples)])
    mean, spread = samples.mean(dim=0), samples.std(dim=0)
    peak_station = mean.argmax(dim=-1)
    return mean, spread, peak_station


def predictive_nll(model: StageForecaster, rain, stage, noise_std=0.2, n_samples=50):
    preds = torch.stack([model(rain) for _ in range(n_samples)])
    return -Normal(preds.mean(0), noise_std).log_prob(stage).mean()


def plot_limits(model: StageForecaster, rain, n_samples=50):
    draws = sum(model(rain) for _ in range(n_samples)) / n_samples
    return float(draws.min()), float(draws.max())


def ensemble_gaussian(members, rain):
    """Gaussian fit to the members' mixture (mean of the means; mean of variance plus squared mean, minus the squared mean)."""
    means, variances = [], []
    for member in members:
        mu, log_var = member(rain)
        means.append(mu)
        variances.append(log_var.exp())
    mu_star = torch.stack(means).mean(0)
    var_star = (torch.stack(variances) + torch.stack(means) ** 2).mean(0) - mu_star ** 2
    return mu_star, var_star
