# Leaf-spectrum classifiers with TFP layers whose KL is divided by the number of training examples.
import numpy as np
import tensorflow as tf
import tensorflow_probability as tfp

tfd = tfp.distributions

x_train = np.random.rand(2_700, 64).astype("float32")
y_train = np.random.randint(0, 4, size=2_700)


def build_model(n_train):
    kl_fn = lambda q, p, _: tfd.kl_divergence(q, p) / n_train
    model = tf.keras.Sequential([
        tf.keras.Input(shape=(64,)),
        tfp.layers.DenseFlipout(48, activation="relu", kernel_divergence_fn=kl_fn),
        tfp.layers.DenseFlipout(4, kernel_divergence_fn=kl_fn),
    ])
    model.compile(optimizer="adam", loss=tf.keras.losses.SparseCategoricalCrossentropy(from_logits=True))
    return model


def build_variational(n_train):
    def posterior(kernel_size, bias_size=0, dtype=None):
        n = kernel_size + bias_size
        return tf.keras.Sequential([tfp.layers.VariableLayer(2 * n, dtype=dtype), tfp.layers.DistributionLambda(lambda t: tfd.Normal(t[..., :n], 1e-3 + tf.nn.softplus(t[..., n:])))])

    def prior(kernel_size, bias_size=0, dtype=None):
        n = kernel_size + bias_size
        return tf.keras.Sequential([tfp.layers.DistributionLambda(lambda t: tfd.Normal(tf.zeros(n), 1.0))])

    model = tf.keras.Sequential([
        tf.keras.Input(shape=(64,)),
        tfp.layers.DenseVariational(4, posterior, prior, kl_weight=1 / n_train),
    ])
    model.compile(optimizer="adam", loss="sparse_categorical_crossentropy")
    return model


def build_frozen_scorer():
    """Loaded from a checkpoint and only used to predict: never trained here."""
    model = tf.keras.Sequential([tf.keras.Input(shape=(64,)), tfp.layers.DenseFlipout(4)])
    model.compile(optimizer="adam", loss="sparse_categorical_crossentropy")
    model.load_weights("checkpoints/leaf_scorer.weights.h5")
    return model


if __name__ == "__main__":
    flipout = build_model(n_train=x_train.shape[0])
    flipout.fit(x_train, y_train, batch_size=90, epochs=3)
    variational = build_variational(len(x_train))
    variational.fit(x_train, y_train, batch_size=90, epochs=3)
    scorer = build_frozen_scorer()
    scorer.predict(x_train[:10])
