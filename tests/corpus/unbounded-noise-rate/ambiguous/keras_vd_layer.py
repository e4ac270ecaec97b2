"""AMBIGUOUS: the same unbounded learned alpha in a Keras layer.

RULES.md names no framework other than PyTorch for this rule ("where a rule says so").
"""
import tensorflow as tf


class KerasVarDropout(tf.keras.layers.Layer):
    def build(self, input_shape):
        self.log_alpha = self.add_weight(name="log_alpha", shape=(input_shape[-1],),
                                         initializer=tf.keras.initializers.Constant(-2.0))

    def call(self, x, training=None):
        if training:
            return x * (1.0 + tf.sqrt(tf.exp(self.log_alpha)) * tf.random.normal(tf.shape(x)))
        return x
