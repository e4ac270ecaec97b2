# Learned Gaussian dropout for the leaf-spectrum classifiers in Keras and Flax, with nothing bounding log alpha.
import flax.linen as fnn
import jax
import jax.numpy as jnp
import tensorflow as tf


class LeafGaussianDropout(tf.keras.layers.Layer):
    def build(self, input_shape):
        self.log_alpha = self.add_weight(name="log_alpha", shape=(input_shape[-1],), initializer="zeros")

    def call(self, x, training=None):
        if training:
            return x * (1.0 + tf.exp(0.5 * self.log_alpha) * tf.random.normal(tf.shape(x)))  # expect[unbounded-noise-rate]
        return x


class FrozenLeafDropout(tf.keras.layers.Layer):
    def build(self, input_shape):
        self.log_alpha = self.add_weight(name="log_alpha", shape=(input_shape[-1],), initializer="zeros", trainable=False)

    def call(self, x, training=None):
        return x * (1.0 + tf.exp(0.5 * self.log_alpha) * tf.random.normal(tf.shape(x)))


class SpectrumNoise(fnn.Module):
    @fnn.compact
    def __call__(self, x, key):
        log_alpha = self.param("log_alpha", fnn.initializers.zeros, (x.shape[-1],))
        return x * (1 + jnp.sqrt(jnp.exp(log_alpha)) * jax.random.normal(key, x.shape))  # expect[unbounded-noise-rate]
