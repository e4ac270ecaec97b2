"""Flipout classifier with the KL of each layer divided by the training-set size."""
import tensorflow as tf
import tensorflow_probability as tfp

from .spectra import load_spectra

tfd = tfp.distributions


def build_scaled_classifier(n_train, n_bands=120, n_classes=4, hidden=64):
    kl_fn = lambda q, p, _: tfd.kl_divergence(q, p) / n_train  # noqa: E731
    return tf.keras.Sequential([
        tf.keras.layers.InputLayer(input_shape=(n_bands,)),
        tfp.layers.DenseFlipout(hidden, activation="relu", kernel_divergence_fn=kl_fn),
        tfp.layers.DenseFlipout(n_classes, kernel_divergence_fn=kl_fn),
    ])


if __name__ == "__main__":
    x_train, y_train, x_val, y_val = load_spectra()
    model = build_scaled_classifier(n_train=len(x_train))
    model.compile(optimizer=tf.keras.optimizers.Adam(1e-3),
                  loss=tf.keras.losses.SparseCategoricalCrossentropy(from_logits=True),
                  metrics=["accuracy"])
    model.fit(x_train, y_train, batch_size=64, epochs=100, validation_data=(x_val, y_val))
