"""Synthetic stand-ins for the lab's data sets (all numbers invented)."""
import numpy as np
import torch

STATIONS = ["Alder Ford", "Mill Weir", "Heron Bridge", "Kettle Lock", "Stone Cut", "Low Meadow"]


def load_stage_records(n_records=19_200, window_hours=24, n_stations=len(STATIONS), seed=0):
    """Hourly catchment rainfall windows (mm) and the stage 6 h later at each station (m)."""
    rng = np.random.default_rng(seed)
    wet = rng.random((n_records, 1)) < 0.35
    rain = rng.gamma(0.6, 2.5, size=(n_records, window_hours)) * wet
    lag_weights = np.exp(-np.arange(window_hours)[::-1] / rng.uniform(4.0, 9.0, size=(n_stations, 1)))
    base = rng.uniform(0.4, 1.6, size=n_stations)
    stage = base + 0.05 * rain @ lag_weights.T + rng.normal(0.0, 0.05, size=(n_records, n_stations))
    return torch.tensor(rain, dtype=torch.float32), torch.tensor(stage, dtype=torch.float32)


def make_vibration_features(n=2_000, n_bands=32, n_classes=5, seed=0):
    """Log band energies of accelerometer spectra from pump bearings, with a fault label.

    Classes: 0 healthy, 1 inner race, 2 outer race, 3 ball, 4 cage.
    """
    rng = np.random.default_rng(seed)
    labels = rng.integers(0, n_classes, size=n)
    centres = rng.normal(0.0, 1.0, size=(n_classes, n_bands))
    x = centres[labels] + rng.normal(0.0, 1.3, size=(n, n_bands))
    return torch.tensor(x, dtype=torch.float32), torch.tensor(labels, dtype=torch.long)
