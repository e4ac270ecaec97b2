"""AMBIGUOUS: Flax MC dropout with one PRNG key reused for every sample.

Issue 4 asks for the key-reuse case; RULES.md's contract for this rule speaks only of eval mode
and the PyTorch dropout family.
"""
import jax
import jax.numpy as jnp
import flax.linen as nn


class LeafMLP(nn.Module):
    @nn.compact
    def __call__(self, x, deterministic=False):
        x = nn.relu(nn.Dense(96)(x))
        x = nn.Dropout(0.3, deterministic=deterministic)(x)
        return nn.Dense(4)(x)


def mc_predict(params, x, key, T=30):
    model = LeafMLP()
    samples = [model.apply(params, x, rngs={"dropout": key}) for _ in range(T)]
    return jax.nn.softmax(jnp.stack(samples), -1).mean(0)
