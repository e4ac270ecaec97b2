"""Loading trained bearing models for inference."""
import torch

from .model import BearingCNN


def load_model(path, **cfg):
    model = BearingCNN(**cfg)
    state = torch.load(path, map_location="cpu")
    model.load_state_dict(state["model"] if "model" in state else state)
    model.eval()
    return model
