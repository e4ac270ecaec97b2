"""python -m leaf_tfp.train"""
import tensorflow as tf

from .model import build_flipout_classifier
from .spectra import load_spectra


def main(epochs=100, batch_size=64):
    x_train, y_train, x_val, y_val = load_spectra()
    model = build_flipout_classifier(n_bands=x_train.shape[1])
    model.compile(
        optimizer=tf.keras.optimizers.Adam(1e-3),
        loss=tf.keras.losses.SparseCategoricalCrossentropy(from_logits=True),
        metrics=["accuracy"],
    )
    model.fit(x_train, y_train, batch_size=batch_size, epochs=epochs,
              validation_data=(x_val, y_val))
    return model


if __name__ == "__main__":
    main()
