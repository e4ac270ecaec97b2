# Evaluates the pump ensemble: combines the members' outputs in several ways.
import torch
import torch.nn.functional as F

from pumpnet.members import BearingClassifier, BearingEnsemble


def ensemble_probabilities(ensemble: BearingEnsemble, x):
    logits = torch.stack([m(x) for m in ensemble.members])
    return F.softmax(logits.mean(0), dim=-1)  # expect[logit-space-average]


def ensemble_vote(ensemble: BearingEnsemble, x):
    outs = []
    for i, member in enumerate(ensemble.members):
        outs.append(member(x))
    return torch.stack(outs).mean(0).argmax(-1)  # expect[logit-space-average]


def three_model_vote(x):
    model_a, model_b, model_c = BearingClassifier(), BearingClassifier(), BearingClassifier()
    scores = torch.stack([model_a(x), model_b(x), model_c(x)])
    return F.softmax(scores.mean(dim=0), dim=-1)  # expect[logit-space-average]


def predictive_entropy(ensemble: BearingEnsemble, x):
    p = F.softmax(ensemble.predict(x), dim=-1)
    return -(p * p.log()).sum(-1)
