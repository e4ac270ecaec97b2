"""DenseVariational version with a trainable prior, KL weighted by 1/N through kl_weight."""
import numpy as np
import tensorflow as tf
import tensorflow_probability as tfp

from .spectra import load_spectra

tfd = tfp.distributions


def posterior_mean_field(kernel_size, bias_size=0, dtype=None):
    n = kernel_size + bias_size
    c = np.log(np.expm1(1.0))
    return tf.keras.Sequential([
        tfp.layers.VariableLayer(2 * n, dtype=dtype),
        tfp.layers.DistributionLambda(lambda t: tfd.Independent(
            tfd.Normal(loc=t[..., :n], scale=1e-5 + tf.nn.softplus(c + t[..., n:])),
            reinterpreted_batch_ndims=1)),
    ])


def prior_trainable(kernel_size, bias_size=0, dtype=None):
    n = kernel_size + bias_size
    return tf.keras.Sequential([
        tfp.layers.VariableLayer(n, dtype=dtype),
        tfp.layers.DistributionLambda(lambda t: tfd.Independent(
            tfd.Normal(loc=t, scale=1.0), reinterpreted_batch_ndims=1)),
    ])


def build(x_train, n_classes=4):
    return tf.keras.Sequential([
        tf.keras.layers.InputLayer(input_shape=(x_train.shape[1],)),
        tfp.layers.DenseVariational(32, posterior_mean_field, prior_trainable,
                                    kl_weight=1 / x_train.shape[0], activation="relu"),
        tfp.layers.DenseVariational(n_classes, posterior_mean_field, prior_trainable,
                                    kl_weight=1 / x_train.shape[0]),
    ])


if __name__ == "__main__":
    x_train, y_train, x_val, y_val = load_spectra()
    model = build(x_train)
    model.compile(optimizer="adam",
                  loss=tf.keras.losses.SparseCategoricalCrossentropy(from_logits=True))
    model.fit(x_train, y_train, batch_size=128, epochs=150)
