# Soil-moisture drift and leaf-spectrum models in Pyro, TensorFlow Probability and Flax.
import jax
import pyro
import pyro.distributions as dist
import tensorflow as tf
import tensorflow_probability as tfp
import torch
from flax import linen as nn

tfd = tfp.distributions


def drift_guide(readings):
    loc = pyro.param("drift_loc", torch.zeros(1))
    scale = pyro.param("drift_scale", torch.ones(1))
    pyro.sample("drift", dist.Normal(loc, scale))  # expect[unconstrained-std]


leaf_scale = tf.Variable(tf.ones([8]) * 0.1)
leaf_loc = tf.Variable(tf.zeros([8]))
leaf_prior = tfd.Normal(loc=leaf_loc, scale=leaf_scale)  # expect[unconstrained-std]


class SpectrumNoise(nn.Module):
    features: int

    @nn.compact
    def __call__(self, x, key):
        sigma = self.param("sigma", nn.initializers.ones, (self.features,))
        return x + sigma * jax.random.normal(key, x.shape)  # expect[unconstrained-std]
