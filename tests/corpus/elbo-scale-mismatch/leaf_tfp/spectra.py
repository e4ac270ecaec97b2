"""Invented leaf reflectance spectra (400-1000 nm, 120 bands) for four water-stress classes."""
import numpy as np

CLASSES = ["well_watered", "mild", "moderate", "severe"]


def load_spectra(n_train=4_800, n_val=800, n_bands=120, seed=7):
    rng = np.random.default_rng(seed)
    wl = np.linspace(400, 1000, n_bands)
    base = 0.05 + 0.45 / (1 + np.exp(-(wl - 715) / 12))

    def draw(n):
        y = rng.integers(0, len(CLASSES), n)
        x = base[None, :] * (1 - 0.06 * y[:, None]) + 0.01 * rng.standard_normal((n, n_bands))
        return x.astype("float32"), y.astype("int64")

    x_train, y_train = draw(n_train)
    x_val, y_val = draw(n_val)
    return x_train, y_train, x_val, y_val
