"""Hand-rolled mean-field dense layer for the leaf-spectrum classifier (Keras + TFP)."""
import tensorflow as tf
import tensorflow_probability as tfp

tfd = tfp.distributions


class MeanFieldDense(tf.keras.layers.Layer):
    def __init__(self, units, n_train, activation=None, **kwargs):
        super().__init__(**kwargs)
        self.units = units
        self.n_train = float(n_train)
        self.activation = tf.keras.activations.get(activation)

    def build(self, input_shape):
        d = int(input_shape[-1])
        self.kernel_loc = tf.Variable(tf.random.normal([d, self.units], stddev=0.1), name="kernel_loc")
        self.kernel_scale = tf.Variable(tf.fill([d, self.units], 0.05), name="kernel_scale")
        self.bias_loc = tf.Variable(tf.zeros([self.units]), name="bias_loc")
        self.bias_rho = tf.Variable(tf.fill([self.units], -3.0), name="bias_rho")
        self.prior_scale = tf.Variable(1.0, trainable=False, name="prior_scale")

    def call(self, x):
        kernel = self.kernel_loc + self.kernel_scale * tf.random.normal(tf.shape(self.kernel_loc))
        bias_scale = 1e-5 + tf.nn.softplus(self.bias_rho)
        bias = self.bias_loc + bias_scale * tf.random.normal([self.units])
        q = tfd.Normal(self.kernel_loc, self.kernel_scale)
        prior = tfd.Normal(0.0, self.prior_scale)
        self.add_loss(tf.reduce_sum(tfd.kl_divergence(q, prior)) / self.n_train)
        return self.activation(tf.matmul(x, kernel) + bias)


class ChlorophyllHead(tf.keras.layers.Layer):
    """Regression head: chlorophyll content (ug/cm2) with a learned reading noise."""

    def __init__(self, **kwargs):
        super().__init__(**kwargs)
        self.dense = tf.keras.layers.Dense(1)
        self.reading_sd = tf.Variable(2.0, name="reading_sd")
        self.reading_rho = tf.Variable(0.5, name="reading_rho")

    def call(self, h):
        return tf.squeeze(self.dense(h), -1)

    def nll(self, h, y):
        return -tfd.Normal(loc=self.call(h), scale=self.reading_sd).log_prob(y)

    def nll_softplus(self, h, y):
        return -tfd.Normal(loc=self.call(h), scale=tf.math.softplus(self.reading_rho)).log_prob(y)
