# Leaf-spectrum classifier in Flax: MC dropout passes that reuse one PRNG key, or switch dropout off.
import jax
import jax.numpy as jnp
import flax.linen as nn


class LeafMLP(nn.Module):
    hidden: int = 64
    n_classes: int = 4

    @nn.compact
    def __call__(self, x, deterministic=False):
        x = nn.relu(nn.Dense(self.hidden)(x))
        x = nn.Dropout(rate=0.2, deterministic=deterministic)(x)
        return nn.Dense(self.n_classes)(x)


def mc_predict(params, x, key, n_samples=30):
    model = LeafMLP()
    probs = [jax.nn.softmax(model.apply(params, x, rngs={"dropout": key})) for _ in range(n_samples)]
    #                                                               ^^^ expect[noiseless-mc-evaluation]
    return jnp.stack(probs).mean(0)


def mc_predict_off(params, x, n_samples=30):
    model = LeafMLP()
    outs = []
    for i in range(n_samples):
        key = jax.random.PRNGKey(i)
        outs.append(model.apply(params, x, deterministic=True, rngs={"dropout": key}))  # expect[noiseless-mc-evaluation]
    return jnp.stack(outs).std(0)


def noisy_inputs(key, x, n_samples=8):
    draws = []
    for t in range(n_samples):
        draws.append(x + 0.1 * jax.random.normal(key, x.shape))  # expect[noiseless-mc-evaluation]
    return jnp.stack(draws)


def mc_stale_split(params, x, key, n_samples=10):
    model = LeafMLP()
    outs = []
    for _ in range(n_samples):
        _, dropout_key = jax.random.split(key)
        outs.append(model.apply(params, x, rngs={"dropout": dropout_key}))  # expect[noiseless-mc-evaluation]
    return jnp.stack(outs).var(0)
