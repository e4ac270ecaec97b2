"""1-D convolutional variant: spectra treated as a signal over wavelength."""
import tensorflow as tf
import tensorflow_probability as tfp

tfd = tfp.distributions

BATCH_SIZE = 32


def kl_per_batch(q, p, _):
    # spread the KL over the examples of a batch
    return tfd.kl_divergence(q, p) / BATCH_SIZE


def build_conv_classifier(n_bands=120, n_classes=4):
    return tf.keras.Sequential([
        tf.keras.layers.Reshape((n_bands, 1), input_shape=(n_bands,)),
        tfp.layers.Convolution1DReparameterization(
            16, kernel_size=7, padding="same", activation="relu",
            kernel_divergence_fn=kl_per_batch,
        ),
        tf.keras.layers.MaxPooling1D(2),
        tf.keras.layers.Flatten(),
        tfp.layers.DenseReparameterization(n_classes, activation="softmax", kernel_divergence_fn=kl_per_batch),
    ])


if __name__ == "__main__":
    from .spectra import load_spectra

    x_train, y_train, x_val, y_val = load_spectra()
    model = build_conv_classifier()
    model.compile(optimizer="adam", loss="sparse_categorical_crossentropy", metrics=["accuracy"])
    model.fit(x_train, y_train, batch_size=BATCH_SIZE, epochs=80, validation_data=(x_val, y_val))
