"""Mean-field VI for a stage-discharge rating curve, written out by hand.

log Q = a + b * log(h - h0), h0 = 0.15 m fixed; invented gauging campaign of 800 measurements.
"""
import torch
import torch.distributions as tdist

torch.manual_seed(0)
N, B = 800, 64
h = torch.rand(N) * 2.5 + 0.2
discharge = 4.1 * (h - 0.15) ** 1.6 * torch.exp(0.08 * torch.randn(N))
X = torch.stack([torch.ones(N), torch.log(h - 0.15)], dim=1)
y = torch.log(discharge)

# variational parameters of q(a, b)
mu = torch.zeros(2).requires_grad_()
sd = torch.full((2,), 0.1, requires_grad=True)
noise_sd = torch.tensor(0.2, requires_grad=True)
prior_sd = torch.tensor(1.0)

opt = torch.optim.Adam([mu, sd, noise_sd], lr=1e-2)
for step in range(3000):
    idx = torch.randint(0, N, (B,))
    coef = mu + sd * torch.empty_like(mu).normal_()
    pred = X[idx] @ coef
    nll = -tdist.Normal(pred, noise_sd).log_prob(y[idx]).sum() * N / B
    kl = (torch.log(prior_sd / sd) + (sd ** 2 + mu ** 2) / (2 * prior_sd ** 2) - 0.5).sum()
    loss = nll + kl
    opt.zero_grad()
    loss.backward()
    opt.step()
    if step % 500 == 0:
        print(f"step {step:4d}  -ELBO {loss.item():9.2f}  a={mu[0]:.3f}  b={mu[1]:.3f}")

with torch.no_grad():
    a_b = mu.detach()
    print("rating curve: Q = %.2f * (h - 0.15)^%.2f" % (a_b[0].exp(), a_b[1]))
    print("posterior sd of (a, b):", sd.detach().tolist())
    print("residual sd (log Q):", float(noise_sd))
