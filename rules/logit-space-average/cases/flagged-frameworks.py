# Leaf-spectrum classifiers in Keras and Flax: stochastic passes averaged as logits before the softmax.
import jax
import jax.numpy as jnp
import numpy as np
import tensorflow as tf
from flax import linen as fnn

N_BANDS = 40
SPECIES = ["oak", "beech", "ash", "maple"]


def build_leaf_model():
    return tf.keras.Sequential([
        tf.keras.layers.Dense(32, activation="relu"),
        tf.keras.layers.Dropout(0.2),
        tf.keras.layers.Dense(len(SPECIES)),
    ])


def leaf_probabilities(model, spectra, n_passes=20):
    logits = np.stack([model(spectra, training=True).numpy() for _ in range(n_passes)])
    return tf.nn.softmax(logits.mean(axis=0), axis=-1)  # expect[logit-space-average]


class LeafNet(fnn.Module):
    @fnn.compact
    def __call__(self, x, deterministic=False):
        h = fnn.relu(fnn.Dense(32)(x))
        h = fnn.Dropout(0.2, deterministic=deterministic)(h)
        return fnn.Dense(len(SPECIES))(h)


def flax_probabilities(params, spectra, key, n_passes=20):
    net = LeafNet()
    keys = jax.random.split(key, n_passes)
    logits = jnp.stack([net.apply(params, spectra, rngs={"dropout": k}) for k in keys])
    return jax.nn.softmax(jnp.mean(logits, axis=0), axis=-1)  # expect[logit-space-average]


leaf_model = build_leaf_model()
