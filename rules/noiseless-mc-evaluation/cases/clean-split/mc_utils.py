# Switches only the dropout layers back on, for MC dropout at test time.
from torch import nn


def enable_mc_dropout(model):
    for module in model.modules():
        if isinstance(module, nn.Dropout):
            module.train()
    return model
