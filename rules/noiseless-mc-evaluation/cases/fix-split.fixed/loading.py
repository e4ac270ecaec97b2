# Loads the trained classifier for evaluation (eval mode for BatchNorm).
import torch

from models import PumpFaultNet


def load_model(path):
    model = PumpFaultNet()
    model.load_state_dict(torch.load(path, map_location="cpu"))
    model.eval()
    return model
