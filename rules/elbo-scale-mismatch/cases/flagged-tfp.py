# Leaf-spectrum classifier with TFP variational layers in Keras: the layers' KL is added unscaled to a mean loss.
import numpy as np
import tensorflow as tf
import tensorflow_probability as tfp

tfd = tfp.distributions
tfpl = tfp.layers

x_train = np.random.rand(2_700, 64).astype("float32")
y_train = np.random.randint(0, 4, size=2_700)

model = tf.keras.Sequential([
    tf.keras.Input(shape=(64,)),
    tfpl.DenseFlipout(48, activation="relu"),  # expect[elbo-scale-mismatch]
    tfpl.DenseReparameterization(4, kernel_divergence_fn=lambda q, p, _: tfd.kl_divergence(q, p)),  # expect[elbo-scale-mismatch]
])
model.compile(optimizer="adam", loss=tf.keras.losses.SparseCategoricalCrossentropy(from_logits=True), metrics=["accuracy"])
model.fit(x_train, y_train, batch_size=90, epochs=3)


def build_conv_model(n_bands=64):
    conv = tf.keras.Sequential()
    conv.add(tf.keras.Input(shape=(n_bands, 1)))
    conv.add(tfp.layers.Convolution1DFlipout(8, kernel_size=5, activation="relu"))  # expect[elbo-scale-mismatch]
    conv.add(tf.keras.layers.Flatten())
    conv.add(tfp.layers.DenseFlipout(4, kernel_divergence_fn=lambda q, p, _: tfd.kl_divergence(q, p) / 32))  # expect[elbo-scale-mismatch]
    conv.compile(optimizer="adam", loss="sparse_categorical_crossentropy")
    conv.fit(x_train[..., None], y_train, batch_size=32, epochs=3)
    return conv
