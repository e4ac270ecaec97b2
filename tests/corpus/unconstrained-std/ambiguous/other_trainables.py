"""Trainable values that RULES.md does not list among the trainable tensors.

pyro.param without a constraint and Keras `add_weight` are trainable, but the rule names only
nn.Parameter, requires_grad tensors, tf.Variable and Flax self.param. Not scored.
"""
import pyro
import pyro.distributions as dist
import tensorflow as tf
import tensorflow_probability as tfp
import torch

tfd = tfp.distributions


def leaf_guide():
    loc = pyro.param("chl_loc", torch.tensor(35.0))
    scale = pyro.param("chl_scale", torch.tensor(3.0))
    pyro.sample("chl", dist.Normal(loc, scale))


class ReflectanceNoise(tf.keras.layers.Layer):
    def build(self, input_shape):
        self.noise_sd = self.add_weight(name="noise_sd", shape=(), initializer=tf.keras.initializers.Constant(0.01))

    def call(self, x):
        return tfd.Normal(x, self.noise_sd).sample()
