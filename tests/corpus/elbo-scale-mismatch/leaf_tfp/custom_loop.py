"""Custom GradientTape loop: default (unscaled) layer KLs, divided by N when added to the loss."""
import tensorflow as tf
import tensorflow_probability as tfp

from .spectra import load_spectra


def main(epochs=60, batch_size=64):
    x_train, y_train, _, _ = load_spectra()
    n_train = x_train.shape[0]
    model = tf.keras.Sequential([
        tfp.layers.DenseReparameterization(48, activation="relu"),
        tfp.layers.DenseReparameterization(4),
    ])
    ds = tf.data.Dataset.from_tensor_slices((x_train, y_train)).shuffle(n_train).batch(batch_size)
    opt = tf.keras.optimizers.Adam(1e-3)
    for epoch in range(epochs):
        for xb, yb in ds:
            with tf.GradientTape() as tape:
                logits = model(xb, training=True)
                nll = tf.reduce_mean(
                    tf.keras.losses.sparse_categorical_crossentropy(yb, logits, from_logits=True))
                kl = tf.add_n(model.losses) / n_train
                loss = nll + kl
            grads = tape.gradient(loss, model.trainable_variables)
            opt.apply_gradients(zip(grads, model.trainable_variables))
        print(epoch, float(loss))


if __name__ == "__main__":
    main()
