# Loads the classifier with BatchNorm in eval mode and dropout re-enabled for MC sampling.
import torch

from mc_utils import enable_mc_dropout
from models import PumpFaultNet


def load_model(path):
    model = PumpFaultNet()
    model.load_state_dict(torch.load(path, map_location="cpu"))
    model.eval()
    return enable_mc_dropout(model)


def load_for_accuracy(path):
    model = PumpFaultNet()
    model.load_state_dict(torch.load(path, map_location="cpu"))
    return model.eval()
