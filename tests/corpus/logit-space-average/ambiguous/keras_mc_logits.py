"""AMBIGUOUS: Keras MC dropout averaging logits, then softmax.

The same mistake as in PyTorch, but RULES.md names no framework for this rule and says
frameworks other than PyTorch are in scope only "where a rule says so".
"""
import numpy as np
import tensorflow as tf


def build(n_bands=120, n_classes=4):
    return tf.keras.Sequential([
        tf.keras.layers.Dense(64, activation="relu", input_shape=(n_bands,)),
        tf.keras.layers.Dropout(0.3),
        tf.keras.layers.Dense(n_classes),
    ])


def mc_predict(model, x, T=50):
    logits = np.stack([model(x, training=True).numpy() for _ in range(T)])
    return tf.nn.softmax(logits.mean(axis=0)).numpy()
