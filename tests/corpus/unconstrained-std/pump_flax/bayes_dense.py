"""Mean-field Bayesian dense layers in Flax for the bearing-fault model (JAX port)."""
import jax
import jax.numpy as jnp
import flax.linen as nn


class BayesDense(nn.Module):
    features: int

    @nn.compact
    def __call__(self, x, key):
        d = x.shape[-1]
        mu = self.param("mu", nn.initializers.normal(0.05), (d, self.features))
        sigma = self.param("sigma", nn.initializers.constant(0.02), (d, self.features))
        b_mu = self.param("b_mu", nn.initializers.zeros, (self.features,))
        b_log_sigma = self.param("b_log_sigma", nn.initializers.constant(-4.0), (self.features,))
        k_w, k_b = jax.random.split(key)
        w = mu + sigma * jax.random.normal(k_w, mu.shape)
        b = b_mu + jnp.exp(b_log_sigma) * jax.random.normal(k_b, b_mu.shape)
        kl = jnp.sum(-jnp.log(sigma) + 0.5 * (sigma ** 2 + mu ** 2) - 0.5)
        self.sow("intermediates", "kl", kl)
        return x @ w + b


class BayesDenseRho(nn.Module):
    features: int
    rho_init: float = -5.0

    @nn.compact
    def __call__(self, x, key):
        d = x.shape[-1]
        mu = self.param("mu", nn.initializers.normal(0.05), (d, self.features))
        rho = self.param("rho", nn.initializers.constant(self.rho_init), (d, self.features))
        sigma = nn.softplus(rho)
        w = mu + sigma * jax.random.normal(key, mu.shape)
        kl = jnp.sum(-jnp.log(sigma) + 0.5 * (sigma ** 2 + mu ** 2) - 0.5)
        self.sow("intermediates", "kl", kl)
        return x @ w


class FaultNet(nn.Module):
    n_classes: int = 5

    @nn.compact
    def __call__(self, x, key):
        k1, k2 = jax.random.split(key)
        h = nn.relu(BayesDenseRho(64)(x, k1))
        return BayesDense(self.n_classes)(h, k2)
