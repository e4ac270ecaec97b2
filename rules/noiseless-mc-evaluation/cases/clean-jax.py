# Flax MC dropout done right: a fresh key per pass (split, fold_in, or carried forward), dropout left on.
import jax
import jax.numpy as jnp
import flax.linen as nn


class LeafMLP(nn.Module):
    @nn.compact
    def __call__(self, x, deterministic=False):
        x = nn.relu(nn.Dense(64)(x))
        x = nn.Dropout(rate=0.2, deterministic=deterministic)(x)
        return nn.Dense(4)(x)


def mc_split(params, x, key, n_samples=30):
    model = LeafMLP()
    keys = jax.random.split(key, n_samples)
    return jnp.stack([jax.nn.softmax(model.apply(params, x, rngs={"dropout": k})) for k in keys]).mean(0)


def mc_fold_in(params, x, key, n_samples=30):
    model = LeafMLP()
    return jnp.stack([model.apply(params, x, rngs={"dropout": jax.random.fold_in(key, i)}) for i in range(n_samples)]).std(0)


def mc_carried(params, x, key, n_samples=30):
    model = LeafMLP()
    outs = []
    for _ in range(n_samples):
        key, dropout_key = jax.random.split(key)
        outs.append(model.apply(params, x, deterministic=False, rngs={"dropout": dropout_key}))
    return jnp.stack(outs).std(0)


def point_prediction(params, x):
    return LeafMLP().apply(params, x, deterministic=True)
