# Leaf-spectrum classifier: a Flipout layer with the default (unscaled) divergence function.
import numpy as np
import tensorflow as tf
import tensorflow_probability as tfp


def build_model(n_train):
    model = tf.keras.Sequential([
        tf.keras.Input(shape=(64,)),
        tfp.layers.DenseFlipout(4),
    ])
    model.compile(optimizer="adam", loss="sparse_categorical_crossentropy")
    return model


x_train = np.random.rand(1_800, 64).astype("float32")
y_train = np.random.randint(0, 4, size=1_800)
model = build_model(n_train=x_train.shape[0])
model.fit(x_train, y_train, batch_size=60, epochs=2)
