# Uses of helper-made stacks that are correct: probability averages, batch means, log-mean-exp, regression means.
import math

import torch
import torch.nn.functional as F

from gauges.models import BearingNet, StageNet
from gauges.sampling import logits_with_count, mc_log_probs, mc_probabilities, passes_on_second_axis, per_batch_logits, stage_passes


def predictive(model: BearingNet, x, n_samples=20):
    return mc_probabilities(model, x, n_samples).mean(0)


def batch_prior(model: BearingNet, batches):
    # One pass per batch: the mean runs over different inputs, not over samples of one prediction.
    return F.softmax(per_batch_logits(model, batches).mean(0), dim=-1)


def batch_class_balance(model: BearingNet, x, n_samples=20):
    # The passes are stacked on axis 1; the mean over axis 0 is over the batch.
    return F.softmax(passes_on_second_axis(model, x, n_samples).mean(0), dim=-1)


def log_predictive(model: BearingNet, x, y, n_samples=20):
    log_p = mc_log_probs(model, x, n_samples)
    return F.nll_loss(torch.logsumexp(log_p, dim=0) - math.log(n_samples), y)


def stage_forecast(net: StageNet, rain, n_samples=50):
    return stage_passes(net, rain, n_samples).mean(0)


def train_stage(net: StageNet, rain, stage):
    return F.mse_loss(net(rain), stage)


def spread_only(model: BearingNet, x, n_samples=20):
    samples, _ = logits_with_count(model, x, n_samples)
    return samples.softmax(-1).var(0).sum(-1)
