# Leaf-spectrum MC dropout in Flax with one key reused for every pass.
import jax
import jax.numpy as jnp
import flax.linen as nn


class LeafMLP(nn.Module):
    @nn.compact
    def __call__(self, x, deterministic=False):
        x = nn.relu(nn.Dense(64)(x))
        x = nn.Dropout(rate=0.2, deterministic=deterministic)(x)
        return nn.Dense(4)(x)


def mc_predict(params, x, key, n_samples=30):
    model = LeafMLP()
    probs = []
    for _ in range(n_samples):
        probs.append(jax.nn.softmax(model.apply(params, x, rngs={"dropout": key})))
    return jnp.stack(probs).mean(0)
