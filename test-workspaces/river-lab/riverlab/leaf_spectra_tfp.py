"""Bayesian classifier of leaf reflectance spectra (TFP Flipout layers in Keras).

64 reflectance bands between 400 and 1000 nm -> leaf condition. Spectra are invented.
"""
import numpy as np
import tensorflow as tf
import tensorflow_probability as tfp

tfd = tfp.distributions
tfpl = tfp.layers

CLASSES = ["healthy", "nitrogen_deficient", "water_stressed", "fungal_spot"]
N_BANDS = 64


def make_spectra(n, seed):
    rng = np.random.default_rng(seed)
    wl = np.linspace(400.0, 1000.0, N_BANDS)
    labels = rng.integers(0, len(CLASSES), size=n)
    red_edge = 700.0 + 8.0 * (labels == 1) - 5.0 * (labels == 3) + rng.normal(0.0, 3.0, size=n)
    nir = 0.45 - 0.08 * (labels == 2) + rng.normal(0.0, 0.03, size=n)
    refl = 0.05 + nir[:, None] / (1.0 + np.exp(-(wl[None, :] - red_edge[:, None]) / 12.0))
    refl += rng.normal(0.0, 0.01, size=refl.shape)
    return refl.astype("float32"), labels.astype("int32")


class SpectralJitter(tf.keras.layers.Layer):
    """Additive reading noise during training, with a learned log-std."""

    def __init__(self, init_log_std=-4.0, **kwargs):
        super().__init__(**kwargs)
        self.log_std = tf.Variable(init_log_std, trainable=True, name="log_std")

    def call(self, x, training=None):
        if not training:
            return x
        return x + tf.exp(self.log_std) * tf.random.normal(tf.shape(x))


def build_model(n_train):
    kl_fn = lambda q, p, _: tfd.kl_divergence(q, p) / n_train
    model = tf.keras.Sequential([
        tf.keras.Input(shape=(N_BANDS,)),
        SpectralJitter(),
        tfpl.DenseFlipout(48, activation="relu", kernel_divergence_fn=kl_fn),
        tfpl.DenseFlipout(len(CLASSES), activation="softmax", kernel_divergence_fn=kl_fn),
    ])
    model.compile(optimizer=tf.keras.optimizers.Adam(1e-3),
                  loss="sparse_categorical_crossentropy", metrics=["accuracy"])
    return model


def predictive(model, x, n_samples=50):
    """Mean class probabilities over weight samples, and predictive entropy (nats)."""
    probs = np.stack([model(x, training=False).numpy() for _ in range(n_samples)])
    mean = probs.mean(axis=0)
    return mean, -(mean * np.log(mean + 1e-12)).sum(axis=-1)


if __name__ == "__main__":
    x_train, y_train = make_spectra(2_700, seed=1)
    x_val, y_val = make_spectra(300, seed=2)
    x_test, y_test = make_spectra(500, seed=3)
    model = build_model(n_train=x_train.shape[0])
    model.fit(x_train, y_train, batch_size=32, epochs=30, validation_data=(x_val, y_val), verbose=2)
    mean, ent = predictive(model, x_test)
    print("test accuracy", (mean.argmax(-1) == y_test).mean())
    print("mean predictive entropy", ent.mean())
