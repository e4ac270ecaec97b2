"""Flipout classifier of leaf reflectance spectra (120 bands -> 4 stress classes)."""
import tensorflow as tf
import tensorflow_probability as tfp


def build_flipout_classifier(n_bands=120, n_classes=4, hidden=64):
    return tf.keras.Sequential([
        tf.keras.layers.InputLayer(input_shape=(n_bands,)),
        tfp.layers.DenseFlipout(hidden, activation="relu"),
        tfp.layers.DenseFlipout(hidden, activation="relu"),
        tfp.layers.DenseFlipout(n_classes),
    ])
