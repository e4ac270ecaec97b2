# Loads a trained classifier for evaluation.
import torch

from models import PumpFaultNet


def load_model(path, n_bands=32):
    model = PumpFaultNet(n_bands=n_bands)
    model.load_state_dict(torch.load(path, map_location="cpu"))
    model.eval()  # BatchNorm must use its running statistics
    return model
