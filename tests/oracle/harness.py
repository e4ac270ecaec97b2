# Runtime oracle harness for tests/oracle/oracle.test.ts: runs rule fixtures and their fixed versions under PyTorch.
"""Runtime oracle harness: executes rule fixtures and their quick-fixed versions with PyTorch on tiny invented data.

Run by tests/oracle/oracle.test.ts as ONE process per test run (importing torch takes about a second and a half):

    /usr/bin/python3 tests/oracle/harness.py JOBS.json

JOBS.json is a list of jobs, each ``{"id", "scenario", "params", "original": {"root", "entry"}, "fixed": {...} | null}``,
where ``root`` is a folder holding the fixture's files (notebooks already turned into their Python text) and ``entry``
the file to execute. Every scenario function below gets a Job and returns plain numbers (JSON); the assertions, with
their published sources, live in the TypeScript test. The harness only measures. Fixtures' own output goes to stderr.

Adding a rule's scenarios: write a function ``def my_scenario(job, params) -> dict`` and list it in SCENARIOS.
"""

import contextlib
import copy
import importlib.util
import json
import math
import os
import sys
import traceback

import torch
import torch.nn.functional as F

SEED = 1234


# ---------------------------------------------------------------------------------------------------------------
# Loading fixtures.


class Job:
    """One fixture run: loads the original and the fixed tree as fresh modules."""

    def __init__(self, spec):
        self.spec = spec
        self.params = spec.get("params") or {}
        self._loaded = {}
        self.last_module = None

    def has_fixed(self):
        return self.spec.get("fixed") is not None

    def load(self, which="original", entry=None, fresh=False):
        """Executes a fixture file of the original or fixed tree as a new module (seeded) and returns it."""
        tree = self.spec[which]
        root = tree["root"]
        entry = entry or tree["entry"]
        key = (which, entry)
        if key in self._loaded and not fresh:
            return self._loaded[key]
        purge_modules_under(root)
        sys.path.insert(0, root)
        try:
            path = os.path.join(root, entry)
            name = "oracle_%s_%s" % (which, "".join(c if c.isalnum() else "_" for c in entry))
            spec = importlib.util.spec_from_file_location(name, path)
            module = importlib.util.module_from_spec(spec)
            sys.modules[name] = module
            self.last_module = module
            torch.manual_seed(SEED)
            spec.loader.exec_module(module)
        finally:
            sys.path.remove(root)
        self._loaded[key] = module
        return module


_roots = set()


def purge_modules_under(root):
    """Forgets modules imported from any fixture tree, so that `from layers import X` re-reads the right tree."""
    _roots.add(os.path.abspath(root))
    for name, module in list(sys.modules.items()):
        path = getattr(module, "__file__", None) or ""
        if any(os.path.abspath(path).startswith(r + os.sep) for r in _roots):
            del sys.modules[name]


def number(x):
    """A float for JSON (NaN and infinities as strings)."""
    v = float(x)
    if math.isnan(v):
        return "nan"
    if math.isinf(v):
        return "inf" if v > 0 else "-inf"
    return v


# ---------------------------------------------------------------------------------------------------------------
# unconstrained-std: plain SGD steps on a raw σ versus the fixed (log σ / softplus) parameterisation.


def effective_sigma(module, name):
    """(σ, stored tensor) for an attribute: the raw tensor, or the exp / softplus of the renamed one after the fix."""
    raw = getattr(module, name, None)
    if isinstance(raw, torch.Tensor) and raw.requires_grad and raw.is_leaf:
        return raw, raw
    log = getattr(module, "log_" + name, None)
    if isinstance(log, torch.Tensor):
        return log.exp(), log
    rho = getattr(module, name + "_rho", None)
    if isinstance(rho, torch.Tensor):
        return F.softplus(rho), rho
    raise AttributeError("no trainable scale %s (or log_%s / %s_rho) on %s" % (name, name, name, type(module).__name__))


def gaussian_kl(sigma, prior_sigma):
    """KL(N(0, σ²) ‖ N(0, σp²)) summed: log(σp/σ) + σ²/(2σp²) − ½ (SOURCES.md §5, closed form)."""
    return (math.log(prior_sigma) - torch.log(sigma) + sigma ** 2 / (2 * prior_sigma ** 2) - 0.5).sum()


def sigma_descent(job, params):
    """A few plain SGD steps on a KL-to-prior objective (plus the fixture's forward as a data term).

    params: entry (optional), build (expression creating the module from namespace `m`), sigmas (attribute names),
    extra_tensors (non-parameter trainable attributes to optimise too), input (shape of invented input or null),
    objective ("kl" = closed form in the harness, or a method call expression on `module`), prior_sigma, lr, steps.
    """
    out = {}
    for which in ("original", "fixed"):
        if which == "fixed" and not job.has_fixed():
            continue
        out[which] = run_sigma_descent(job, which, params)
    return out


def run_sigma_descent(job, which, params):
    m = job.load(which, params.get("entry"))
    torch.manual_seed(SEED)
    module = eval(params["build"], {"m": m, "torch": torch})
    names = params["sigmas"]
    stored = []
    for name in names:
        stored.append(effective_sigma(module, name)[1])
    extra = [getattr(module, n) for n in params.get("extra_tensors", []) if isinstance(getattr(module, n, None), torch.Tensor)]
    trainable = list(module.parameters()) if hasattr(module, "parameters") else []
    for t in stored + extra:
        if not any(t is p for p in trainable):
            trainable.append(t)
    optimiser = torch.optim.SGD(trainable, lr=params["lr"])
    prior_sigma = params["prior_sigma"]
    torch.manual_seed(SEED + 1)
    x = torch.randn(*params["input"]) if params.get("input") else None
    trace = []
    result = {"error": None, "nan_step": None, "first_nonpositive_step": None}
    for step in range(params["steps"] + 1):
        sigmas = [effective_sigma(module, n)[0] for n in names]
        smallest = min(float(s.detach().min()) for s in sigmas)
        trace.append(smallest)
        if smallest <= 0 and result["first_nonpositive_step"] is None:
            result["first_nonpositive_step"] = step
        try:
            torch.manual_seed(SEED + 2 + step)
            if params["objective"] == "kl":
                loss = sum(gaussian_kl(s, prior_sigma) for s in sigmas)
            else:
                loss = eval(params["objective"], {"module": module, "torch": torch, "math": math, "prior_sigma": prior_sigma})
            if x is not None:
                y = module(x)
                if isinstance(y, tuple):
                    y = y[0]
                loss = loss + 1e-3 * (y ** 2).mean()
        except Exception as error:  # the fixture's own code refuses the scale (e.g. Normal validates scale > 0)
            result["error"] = "%s: %s" % (type(error).__name__, str(error).split("\n")[0][:160])
            break
        if not torch.isfinite(loss):
            result["nan_step"] = step
            break
        if step == params["steps"]:
            break
        optimiser.zero_grad()
        loss.backward()
        optimiser.step()
    result["sigma_trace"] = [number(v) for v in trace]
    result["min_sigma"] = number(min(trace))
    result["final_loss"] = number(loss.detach()) if result["error"] is None else None
    return result


# ---------------------------------------------------------------------------------------------------------------
# logit-space-average: the flagged predictive versus the probability average (the MC / ensemble predictive).


def confident(module, factor=3.0):
    """Scales every weight so the invented network makes confident, disagreeing predictions (like a trained one)."""
    with torch.no_grad():
        for p in module.parameters():
            p.mul_(factor)
    return module


def reference_probs(model, x, T, pattern):
    """(1/T)·Σ_t softmax(f_t(x)): the MC predictive (Gal & Ghahramani 2016), drawn in the fixture's order."""
    model.train()
    if pattern == "repeat":
        return F.softmax(model(x.repeat(T, 1)).view(T, x.shape[0], -1), dim=-1).mean(0)
    if pattern == "loop":
        probs = [F.softmax(model(x), dim=-1) for _ in range(T)]
    elif pattern == "seeded-loop":
        probs = []
        for seed in range(T):
            torch.manual_seed(seed)
            probs.append(F.softmax(model(x), dim=-1))
    elif pattern == "expand":
        return F.softmax(model(x.unsqueeze(0).expand(T, -1, -1)), dim=-1).mean(0)
    elif pattern == "interleave":
        # One call on every example repeated T times in a row, the copies unfolded onto axis 1.
        return F.softmax(model(x.repeat_interleave(T, dim=0)).view(x.shape[0], T, -1), dim=-1).mean(1)
    elif pattern == "second-axis":
        return F.softmax(model(x.unsqueeze(1).expand(-1, T, -1)), dim=-1).mean(1)
    elif pattern == "binary-loop":
        return torch.stack([torch.sigmoid(model(x)) for _ in range(T)]).mean(0)
    elif pattern == "logprob-loop":
        probs = [model(x).exp() for _ in range(T)]
    else:
        raise ValueError(pattern)
    return torch.stack(probs).mean(0)


def as_tensor(value):
    if isinstance(value, torch.distributions.Distribution):
        return value.probs
    if isinstance(value, torch.Tensor):
        return value.detach()
    return torch.as_tensor(value)


def compare_output(kind, orig, fixed, ref, y):
    """Numbers for one function: how far the flagged output is from the reference, and the fixed one."""
    r = {}
    o = as_tensor(orig).double()
    f = as_tensor(fixed).double() if fixed is not None else None
    if kind == "probs":
        target = ref
    elif kind == "argmax":
        target = ref.argmax(dim=-1)
    elif kind == "max-prob":
        target = ref.max(dim=-1).values
    elif kind == "nll":
        target = -torch.log(ref.gather(1, y.unsqueeze(1))).mean()
    elif kind == "log-prob-at-label":
        target = torch.log(ref.gather(1, y.unsqueeze(1)).squeeze(1))
    elif kind == "logprobs":
        target = torch.log(ref)
    elif kind == "entropy":
        target = -(ref * ref.log()).sum(-1)
    elif kind == "binary-probs":
        target = ref
    elif kind == "bce":
        target = F.binary_cross_entropy(ref, y.to(ref.dtype))
    elif kind == "alarm":
        target = ref > 0.5
    elif kind == "correct":
        # The labels are the reference's own predictions, so the reference scores every example.
        target = (ref.argmax(dim=-1) == y).sum()
    else:
        raise ValueError(kind)
    target = target.double()
    if kind in ("argmax", "alarm"):
        r["disagreements"] = int((o != target).sum())
        r["fixed_disagreements"] = int((f != target).sum()) if f is not None else None
        r["n"] = int(target.numel())
    else:
        r["bug_gap"] = number((o - target).abs().max())
        if kind == "correct":
            r["n"] = int(y.numel())
        r["fixed_gap"] = number((f - target).abs().max()) if f is not None else None
    if kind in ("probs",):
        r["nll_flagged"] = number(-torch.log(o.gather(1, y.unsqueeze(1))).mean())
        r["nll_reference"] = number(-torch.log(target.gather(1, y.unsqueeze(1))).mean())
        # Expected NLL when the labels follow the reference predictive (cross-entropy H(ref, q)).
        r["expected_nll_flagged"] = number(-(target * torch.log(o)).sum(-1).mean())
        r["expected_nll_reference"] = number(-(target * torch.log(target)).sum(-1).mean())
    if kind in ("log-prob-at-label", "logprobs"):
        r["jensen_violations"] = int((o > target + 1e-9).sum())
    if kind == "nll":
        r["nll_flagged"] = number(o)
        r["nll_reference"] = number(target)
    if f is not None and kind not in ("argmax", "alarm"):
        r["fixed_equals_flagged"] = bool(torch.allclose(o, f))
    elif f is not None:
        r["fixed_equals_flagged"] = bool((o == f).all())
    return r


def mc_functions(job, params):
    """Calls each listed function of a flagged fixture and of its fixed version on the same model and dropout masks.

    params: model (expression creating the model from namespace `m`), input ([B, F]), T, functions: list of
    {name, kind, pattern, args ("model,x,T" style call template)}.
    """
    m = job.load("original")
    mf = job.load("fixed") if job.has_fixed() else None
    torch.manual_seed(SEED)
    model = eval(params["model"], {"m": m, "torch": torch})
    if params.get("confident", True) and hasattr(model, "parameters"):
        confident(model, params.get("factor", 3.0))
    # The same weights in the fixed module's own class, so that fixed methods (`model.predict`) run too.
    fixed_model = model
    if mf is not None and hasattr(model, "state_dict"):
        torch.manual_seed(SEED)
        fixed_model = eval(params["model"], {"m": mf, "torch": torch})
        fixed_model.load_state_dict(model.state_dict())
    torch.manual_seed(SEED + 1)
    x = torch.randn(*params["input"])
    T = params["T"]
    results = {}
    for spec in params["functions"]:
        pattern = spec.get("pattern", "loop")
        with torch.no_grad():
            torch.manual_seed(SEED + 2)
            # A function that builds its own model: rebuild it from the same seed for the reference.
            sampler = eval(spec["factory"], {"m": m}) if spec.get("factory") else model
            ref = reference_probs(sampler, x, T, pattern)
        torch.manual_seed(SEED + 3)
        if pattern == "binary-loop":
            y = torch.bernoulli(ref)
        elif spec["kind"] == "correct":
            y = ref.argmax(dim=-1)
        else:
            y = torch.distributions.Categorical(probs=ref).sample()
        call = spec.get("call", "f(model, x, T)")

        def run(module, net):
            f = getattr(module, spec["name"], None)
            torch.manual_seed(SEED + 2)
            with torch.no_grad():
                return eval(call, {"f": f, "model": net, "x": x, "T": T, "y": y, "torch": torch})

        orig = run(m, model)
        fixed = run(mf, fixed_model) if mf is not None else None
        r = compare_output(spec["kind"], orig, fixed, ref.double(), y)
        results[spec["name"]] = r
    return results


def worked_example(job, params):
    """SOURCES.md §9: T = 2 passes whose true-class probabilities are 0.9 and 0.1, through the fixture's function."""

    class TwoPasses(torch.nn.Module):
        """Returns logits whose softmax is [0.9, 0.1] on the first call and [0.1, 0.9] on the second (true class 0)."""

        def __init__(self):
            super().__init__()
            self.calls = 0

        def forward(self, x):
            p = [0.9, 0.1] if self.calls % 2 == 0 else [0.1, 0.9]
            self.calls += 1
            return torch.log(torch.tensor([p], dtype=torch.float64)).expand(x.shape[0], 2)

    out = {}
    x = torch.zeros(1, 3)
    y = torch.zeros(1, dtype=torch.long)
    for which in ("original", "fixed"):
        if which == "fixed" and not job.has_fixed():
            continue
        f = getattr(job.load(which), params["function"])
        out[which] = number(f(TwoPasses(), x, y, 2).squeeze())
    return out


def notebook_predictive(job, params):
    """A notebook run top to bottom (seeded): the flagged predictive variable against the softmax average of its samples."""
    out = {}
    m = job.load("original")
    samples = getattr(m, params["samples"]).detach()
    ref = F.softmax(samples, dim=-1).mean(0).double()
    orig = getattr(m, params["predictive"]).detach().double()
    out["bug_gap"] = number((orig - ref).abs().max())
    if job.has_fixed():
        mf = job.load("fixed")
        same_samples = bool(torch.equal(getattr(mf, params["samples"]).detach(), samples))
        fixed = getattr(mf, params["predictive"]).detach().double()
        out["fixed_gap"] = number((fixed - ref).abs().max())
        out["same_samples"] = same_samples
    return out


def ensemble_functions(job, params):
    """Trains a small ensemble with the fixture's own training code, then compares each combination with the mixture."""
    m = job.load("original")
    mf = job.load("fixed") if job.has_fixed() else None
    members_module = job.load("original", params["members_entry"])
    torch.manual_seed(SEED)
    ensemble = eval(params["ensemble"], {"m": members_module})
    torch.manual_seed(SEED + 1)
    x = torch.randn(*params["input"])
    y_train = (x[:, 0] > 0).long() + (x[:, 1] > 0.5).long()
    if params.get("train"):
        trainer = job.load("original", params["train"]["entry"])
        getattr(trainer, params["train"]["function"])(ensemble, x, y_train, params["train"].get("steps", 20))
    confident(ensemble, params.get("factor", 2.0))
    fixed_ensemble = None
    if mf is not None:
        fixed_members = job.load("fixed", params["members_entry"])
        torch.manual_seed(SEED)
        fixed_ensemble = eval(params["ensemble"], {"m": fixed_members})
        fixed_ensemble.load_state_dict(ensemble.state_dict())
    with torch.no_grad():
        ref = torch.stack([F.softmax(member(x), dim=-1) for member in ensemble.members]).mean(0).double()
    torch.manual_seed(SEED + 3)
    y = torch.distributions.Categorical(probs=ref).sample()
    results = {}
    for spec in params["functions"]:
        if spec.get("reference") == "three-new":
            # The function builds three fresh members itself: rebuild them with the same seed for the reference.
            torch.manual_seed(SEED + 2)
            fresh = [members_module.BearingClassifier() for _ in range(3)]
            with torch.no_grad():
                spec_ref = torch.stack([F.softmax(c(x), dim=-1) for c in fresh]).mean(0).double()
        else:
            spec_ref = ref

        def run(module, ens):
            torch.manual_seed(SEED + 2)
            with torch.no_grad():
                return eval(spec["call"], {"module": module, "ensemble": ens, "x": x, "torch": torch})

        orig = run(m, ensemble)
        fixed = run(mf, fixed_ensemble) if mf is not None else None
        results[spec["name"]] = compare_output(spec["kind"], orig, fixed, spec_ref, y)
    return results


# ---------------------------------------------------------------------------------------------------------------
# elbo-scale-mismatch: the KL weight one training step actually applies, relative to the data term.


class StopAfterStep(Exception):
    """Raised from the patched backward once the measured step's loss has been captured."""


def elbo_weight(job, params):
    """Runs each listed training function of the original and fixed fixture up to one backward pass and measures
    the loss as c·Σ_batch nll + w·KL: w from a probe multiplying the KL method's value, c from the rest of the loss
    over the batch-summed NLL of the model's own outputs. The factor w·N / (c·B) is 1 for a minibatch ELBO.

    params: runs: list of {function (name, or null when the file trains at load time), model_class, kl_class,
    kl_method, kl_total (expression in the module's namespace giving the total KL, optional), data ("mse" | "ce"),
    target_index (default 1), skip (backward passes to let through first, default 0)}.
    """
    out = {}
    for which in ("original", "fixed"):
        if which == "fixed" and not job.has_fixed():
            continue
        out[which] = {}
        for run in params["runs"]:
            label = run.get("function") or "<module>"
            out[which][label] = measure_elbo_step(job, which, run)
    return out


def measure_elbo_step(job, which, run):
    probe = torch.ones((), requires_grad=True)
    state = {"kl_calls": [], "outputs": [], "batch": None, "loader": None, "backwards": 0, "loss": None, "grad": None}
    model_class, kl_class, kl_method = run["model_class"], run["kl_class"], run["kl_method"]
    skip = run.get("skip", 0)

    def wrap_kl(cls):
        original = cls.__dict__.get(kl_method)
        if original is None:
            return

        def probed(self, *args, **kwargs):
            value = original(self, *args, **kwargs)
            state["kl_calls"].append(float(value.detach()))
            return value * probe

        setattr(cls, kl_method, probed)

    def init_subclass(cls, **kwargs):
        if cls.__name__ == kl_class:
            wrap_kl(cls)

    def forward_hook(module, inputs, output):
        if type(module).__name__ == model_class:
            state["outputs"].append(output[0] if isinstance(output, tuple) else output)

    loader_iter = torch.utils.data.DataLoader.__iter__

    def recording_iter(self):
        for batch in loader_iter(self):
            state["loader"] = self
            state["batch"] = batch
            yield batch

    tensor_backward = torch.Tensor.backward

    def measuring_backward(self, *args, **kwargs):
        state["backwards"] += 1
        if state["backwards"] <= skip:
            state["kl_calls"] = []
            state["outputs"] = []
            return None
        state["loss"] = float(self.detach())
        grad = torch.autograd.grad(self, probe, retain_graph=True, allow_unused=True)[0]
        state["grad"] = 0.0 if grad is None else float(grad)
        raise StopAfterStep()

    optimisers = [getattr(torch.optim, n) for n in ("SGD", "Adam", "AdamW", "RMSprop", "Adagrad")]
    saved_steps = [(o, o.__dict__.get("step")) for o in optimisers]
    saved_init_subclass = torch.nn.Module.__dict__.get("__init_subclass__")
    handle = torch.nn.modules.module.register_module_forward_hook(forward_hook)
    torch.nn.Module.__init_subclass__ = classmethod(init_subclass)
    torch.utils.data.DataLoader.__iter__ = recording_iter
    torch.Tensor.backward = measuring_backward
    for o, _ in saved_steps:
        o.step = lambda self, *a, **k: None
    module = None
    try:
        try:
            module = job.load(which, fresh=True)
            if run.get("function"):
                getattr(module, run["function"])()
        except StopAfterStep:
            # A notebook trains at top level: the step stops it while loading, its namespace is the partial module.
            module = module or job.last_module
        if state["loss"] is None:
            raise RuntimeError("the fixture finished without a backward pass")
    finally:
        handle.remove()
        if saved_init_subclass is None:
            del torch.nn.Module.__init_subclass__
        else:
            torch.nn.Module.__init_subclass__ = saved_init_subclass
        torch.utils.data.DataLoader.__iter__ = loader_iter
        torch.Tensor.backward = tensor_backward
        for o, step in saved_steps:
            o.step = step
    if run.get("kl_total"):
        with torch.no_grad():
            kl = float(eval(run["kl_total"], dict(module.__dict__)))
    else:
        kl = sum(state["kl_calls"])
    batch = state["batch"]
    y = batch[run.get("target_index", 1)]
    pred = state["outputs"][-1]
    if run["data"] == "mse":
        nll_sum = float(F.mse_loss(pred.detach(), y, reduction="sum"))
    elif run["data"] == "ce":
        nll_sum = float(F.cross_entropy(pred.detach(), y, reduction="sum"))
    else:
        raise ValueError(run["data"])
    n = len(state["loader"].dataset)
    b = int(y.shape[0])
    w = state["grad"] / kl
    c = (state["loss"] - w * kl) / nll_sum
    return {"N": n, "B": b, "kl_weight": number(w), "data_weight": number(c), "factor": number(w * n / (c * b)), "loss": number(state["loss"]), "kl": number(kl)}


# ---------------------------------------------------------------------------------------------------------------
# unbounded-noise-rate: the sign of the single-sample gradient through multiplicative noise, and the noise's variance.


def standard_normal_cdf(z):
    """Φ(z) = ½·erfc(−z/√2) from Python's math.erfc: an independent check value for the rule's own normal-cdf.ts."""
    return 0.5 * math.erfc(-z / math.sqrt(2.0))


def set_tensors(module, values, namespace):
    """Overwrites tensors of a module in place: {attribute: number, or expression evaluated with `module` in scope}."""
    with torch.no_grad():
        for name, value in values.items():
            target = getattr(module, name)
            v = eval(value, namespace) if isinstance(value, str) else value
            target.copy_(torch.as_tensor(v, dtype=target.dtype).expand_as(target))


def draw_seed(index, which):
    """A seed of its own for each run and tree, so that the noise draws of different measurements are independent."""
    return SEED + 1000 * (index + 1) + (500 if which == "fixed" else 0)


def build_noise_layer(job, which, run, values):
    """The run's layer from the original or fixed tree, with its noise tensors set to `values` and `prepare` run."""
    m = job.load(which, run.get("entry"))
    torch.manual_seed(SEED)
    module = eval(run["build"], {"m": m, "torch": torch})
    namespace = {"m": m, "torch": torch, "math": math, "module": module}
    set_tensors(module, values, namespace)
    if run.get("prepare"):
        exec(run["prepare"], namespace)
    if run.get("train", True):
        module.train()
    return module


def gradient_draws(module, run, x, weights, repeats, seed):
    """Gradients of a loss linear in the layer's output, Σ c·y, with respect to the target (a weight or the input).

    The loss is linear so that ∂L/∂(noisy value) does not depend on the noise draw: the noise then reaches the target's
    gradient only as the factor the layer multiplies it by. Returns the gradients and outputs of `repeats` fresh draws.
    """
    method = getattr(module, run.get("method", "forward"))
    grads, outputs = [], []
    for r in range(repeats):
        torch.manual_seed(seed + r)
        inp = x.clone().requires_grad_(run["target"] == "input")
        target = inp if run["target"] == "input" else getattr(module, run["target"])
        if target is not inp:
            target.grad = None
        y = method(inp)
        (weights * y).sum().backward()
        grads.append(target.grad.detach().clone().flatten())
        outputs.append(y.detach().clone())
    return grads, outputs


class NoNoise:
    """Makes the standard-normal samplers return zeros (ε = 0) while active: the same code with its noise switched off.

    Covers torch.randn_like, torch.randn (also where a fixture imported them by name) and the sampler behind
    torch.distributions.Normal.rsample. A noise source it misses shows up as a reference gradient that changes with the
    seed, which the oracle checks is exactly zero.
    """

    def __enter__(self):
        import torch.distributions.normal as normal_module

        self.saved = [(torch, "randn_like", torch.randn_like), (torch, "randn", torch.randn), (normal_module, "_standard_normal", normal_module._standard_normal)]
        originals = {id(torch.randn_like), id(torch.randn)}

        def zeros_like(t, *args, **kwargs):
            return torch.zeros_like(t, dtype=kwargs.get("dtype"))

        def zeros(*size, **kwargs):
            return torch.zeros(*size, dtype=kwargs.get("dtype"), device=kwargs.get("device"))

        def standard_normal_zeros(shape, dtype, device):
            return torch.zeros(shape, dtype=dtype, device=device)

        replacements = {id(torch.randn_like): zeros_like, id(torch.randn): zeros}
        torch.randn_like = zeros_like
        torch.randn = zeros
        normal_module._standard_normal = standard_normal_zeros
        # Names a fixture imported directly (`from torch import randn_like`).
        for module in list(sys.modules.values()):
            path = os.path.abspath(getattr(module, "__file__", None) or "")
            if not any(path.startswith(r + os.sep) for r in _roots):
                continue
            for name, value in list(vars(module).items()):
                if id(value) in originals:
                    self.saved.append((module, name, value))
                    setattr(module, name, replacements[id(value)])
        return self

    def __exit__(self, *exc):
        for owner, name, value in reversed(self.saved):
            setattr(owner, name, value)
        return False


def sign_flip_measurement(job, which, run, noisy, seed):
    """Sign flips of the target's gradient at the noisy setting against the same code with ε = 0 (no noise)."""
    module = build_noise_layer(job, which, run, noisy)
    torch.manual_seed(SEED + 1)
    x = torch.randn(*run["input"])
    with torch.no_grad():
        shape = getattr(module, run.get("method", "forward"))(x).shape
    weights = torch.randn(shape, generator=torch.Generator().manual_seed(SEED + 5))
    with NoNoise():
        # Two reference draws with different seeds: identical, so no noise source is left in the reference.
        reference = gradient_draws(module, run, x, weights, 1, SEED + 100)[0][0]
        reference_again = gradient_draws(module, run, x, weights, 1, SEED + 200)[0][0]
    grads, outputs = gradient_draws(module, run, x, weights, run.get("repeats", 1), seed)
    usable = reference != 0
    ref = reference[usable]
    ratios = torch.cat([(g[usable] / ref).double() for g in grads])
    flips = torch.cat([(torch.sign(g[usable]) != torch.sign(ref)) for g in grads])
    stacked = torch.stack(outputs).double()
    per_element = stacked.var(0).flatten() if len(outputs) > 1 else None
    return {
        "draws": int(flips.numel()),
        "zero_reference": int((~usable).sum()),
        "flip_rate": number(flips.double().mean()),
        # The noise factor is the ratio of the noisy gradient to the noiseless one; its variance is the α at work.
        "factor_mean": number(ratios.mean()),
        "factor_variance": number(ratios.var()),
        "max_factor_deviation": number((ratios - 1).abs().max()),
        "reference_jitter": number((reference_again - reference).abs().max()),
        # Mean over output elements of the variance across draws, and its standard error (needs two draws or more).
        "output_variance": number(per_element.mean()) if per_element is not None else None,
        "output_variance_se": number(per_element.std() / math.sqrt(per_element.numel())) if per_element is not None else None,
    }


def noise_sign_flip(job, params):
    """For each run: the wrong-sign rate of the target's single-sample gradient and the noise factor's variance.

    params: runs: list of {name, build (expression with `m`), method (default forward), input ([shape]), target
    ("input" or a tensor attribute such as "theta"), noisy ({attribute: value or expression}: the setting to measure;
    the reference gradient is the same code at the same setting with ε = 0), fixed_noisy (for the fixed tree, when the
    fix renamed the tensor), prepare (statements run after setting, e.g. the fixture's own in-place bound),
    repeats, alphas ({original, fixed}: the α the check expects, for Φ(−1/√α) by math.erfc)}.
    """
    out = {}
    for which in ("original", "fixed"):
        if which == "fixed" and not job.has_fixed():
            continue
        out[which] = {}
        for index, run in enumerate(params["runs"]):
            noisy = run.get("fixed_noisy", run["noisy"]) if which == "fixed" else run["noisy"]
            r = sign_flip_measurement(job, which, run, noisy, draw_seed(index, which))
            alpha = (run.get("alphas") or {}).get(which)
            if alpha is not None:
                r["expected_alpha"] = alpha
                r["expected_flip_rate"] = standard_normal_cdf(-1 / math.sqrt(alpha)) if alpha > 0 else 0.0
            out[which][run["name"]] = r
    out["phi_minus_one"] = standard_normal_cdf(-1.0)
    return out


def noise_variance(job, params):
    """For each run: the variance of the multiplicative noise factor the layer applies to an all-ones input.

    params: runs: list of {name, build, input ([shape]), values (optional {attribute: value}), prepare (optional)}.
    """
    out = {}
    for which in ("original", "fixed"):
        if which == "fixed" and not job.has_fixed():
            continue
        out[which] = {}
        for index, run in enumerate(params["runs"]):
            module = build_noise_layer(job, which, run, run.get("values", {}))
            torch.manual_seed(draw_seed(index, which))
            with torch.no_grad():
                factor = module(torch.ones(*run["input"])).double().flatten()
            out[which][run["name"]] = {"n": int(factor.numel()), "mean": number(factor.mean()), "variance": number(factor.var())}
    return out


# ---------------------------------------------------------------------------------------------------------------
# noiseless-mc-evaluation: every forward pass of the model during an MC loop, its mode, and its BatchNorm statistics.


def norm_layers(module):
    """The BatchNorm layers under a module, with their names."""
    return [(n, s) for n, s in module.named_modules() if isinstance(s, torch.nn.modules.batchnorm._BatchNorm)]


def norm_state(module):
    """Clones of every BatchNorm buffer (running_mean, running_var, num_batches_tracked) under a module."""
    return {"%s.%s" % (n, b): t.detach().clone() for n, s in norm_layers(module) for b, t in s.named_buffers(recurse=False)}


def dropout_layers(module):
    """The torch.nn dropout layers (Dropout, AlphaDropout, ...) under a module."""
    return [s for s in module.modules() if isinstance(s, torch.nn.modules.dropout._DropoutNd)]


def first_tensor(value):
    """The output tensor of a forward that may return a tuple."""
    if isinstance(value, torch.Tensor):
        return value
    if isinstance(value, (tuple, list)):
        return first_tensor(value[0])
    raise TypeError("the model returned %s" % type(value).__name__)


class PassRecorder:
    """Wraps the forward of the named model classes (workspace classes as they are defined, torch.nn ones directly)
    and records every outermost call while recording: the model object, its input, output, mode flags and its
    BatchNorm buffers before and after the call. `model.forward(x)` is recorded as well as `model(x)`."""

    def __init__(self, class_names):
        self.class_names = set(class_names)
        self.recording = False
        self.depth = 0
        self.calls = []
        self.restore = []
        self.saved_init_subclass = None

    def wrap(self, cls):
        original = cls.__dict__.get("forward")
        if original is None or getattr(original, "_oracle_wrapped", False):
            return
        recorder = self

        def forward(module, *args, **kwargs):
            if not recorder.recording or recorder.depth > 0:
                return original(module, *args, **kwargs)
            before = norm_state(module)
            in_train = sorted({type(s).__name__ for s in module.modules() if s.training})
            norm_eval = all(not s.training for _, s in norm_layers(module))
            recorder.depth += 1
            try:
                result = original(module, *args, **kwargs)
            finally:
                recorder.depth -= 1
            recorder.calls.append({
                "class": type(module).__name__,
                "module": module,
                "input": args[0].detach().clone(),
                "output": first_tensor(result).detach().clone(),
                "before": before,
                "after": norm_state(module),
                "in_train": in_train,
                "norm_eval": norm_eval,
            })
            return result

        forward._oracle_wrapped = True
        cls.forward = forward
        self.restore.append((cls, original))

    def __enter__(self):
        recorder = self
        for name in self.class_names:
            if hasattr(torch.nn, name):
                self.wrap(getattr(torch.nn, name))
        self.saved_init_subclass = torch.nn.Module.__dict__.get("__init_subclass__")

        def init_subclass(cls, **kwargs):
            if cls.__name__ in recorder.class_names:
                recorder.wrap(cls)

        torch.nn.Module.__init_subclass__ = classmethod(init_subclass)
        return self

    def __exit__(self, *exc):
        if self.saved_init_subclass is None:
            del torch.nn.Module.__init_subclass__
        else:
            torch.nn.Module.__init_subclass__ = self.saved_init_subclass
        for cls, original in reversed(self.restore):
            cls.forward = original
        return False


def save_weights(job, which, spec):
    """A checkpoint for fixtures that load one: the model class of the tree, its BatchNorm statistics moved by a few
    training-mode passes on invented data (as a trained model's are), saved next to the tree's files."""
    m = job.load(which, spec["entry"], fresh=True)
    torch.manual_seed(SEED + 11)
    model = eval(spec["build"], {"m": m, "torch": torch})
    model.train()
    with torch.no_grad():
        for _ in range(3):
            model(torch.randn(*spec["input"]) * 2 + 0.5)
    path = os.path.join(job.spec[which]["root"], "oracle-weights.pt")
    torch.save(model.state_dict(), path)
    return path


def segment_numbers(calls, spread_value):
    """Numbers for one MC loop: the passes against a single deterministic pass, their spread, and BatchNorm."""
    module = calls[0]["module"]
    groups = {}
    for call in calls:
        key = (tuple(call["input"].shape), call["input"].numpy().tobytes())
        groups.setdefault(key, []).append(call)
    identical, max_deviation = 0, 0.0
    with torch.no_grad():
        for call in calls:
            # The single deterministic pass: a copy of the model in eval mode on the same input.
            reference = copy.deepcopy(call["module"]).eval()
            det = first_tensor(reference(call["input"]))
            identical += int(torch.equal(det, call["output"]))
            max_deviation = max(max_deviation, float((det - call["output"]).abs().max()))
    spread, distinct, distinct_votes = 0.0, 0, 0
    for group in groups.values():
        outs = torch.stack([c["output"] for c in group]).double()
        if len(group) > 1:
            spread = max(spread, float(outs.std(0).max()))
        distinct = max(distinct, len({c["output"].numpy().tobytes() for c in group}))
        votes = outs.argmax(-1)
        distinct_votes = max(distinct_votes, max(len(set(votes[:, i].tolist())) for i in range(votes.shape[1])) if votes.dim() == 2 else 1)
    first, last = calls[0], calls[-1]
    norm_unchanged = all(torch.equal(first["before"][k], last["after"][k]) for k in first["before"])
    return {
        "passes": len(calls),
        "inputs": len(groups),
        "identical_to_deterministic": identical,
        "max_deviation_from_deterministic": max_deviation,
        "spread": spread,
        "distinct_samples": distinct,
        "distinct_votes": distinct_votes,
        "norm_buffers": len(first["before"]),
        "norm_unchanged": norm_unchanged,
        "norm_eval_during": all(c["norm_eval"] for c in calls),
        "norm_eval_after": all(not s.training for _, s in norm_layers(module)),
        "dropout_layers": len(dropout_layers(module)),
        "dropout_on_during": min(sum(1 for s in dropout_layers(c["module"]) if s.training) for c in calls),
        "in_train": first["in_train"],
        "returned_spread": spread_value[0] if spread_value else None,
        # The returned spread's machine epsilon times the largest sample: the scale of a float rounding in its mean.
        "returned_rounding": spread_value[1] * max(1.0, max(float(c["output"].abs().max()) for c in calls)) if spread_value else None,
    }


def as_magnitude(value):
    """The largest absolute value of a returned spread (tensor, array or number) and its type's machine epsilon."""
    if isinstance(value, torch.Tensor):
        return float(value.detach().abs().max()), float(torch.finfo(value.dtype).eps) if value.is_floating_point() else 0.0
    import numpy

    array = numpy.asarray(value)
    eps = float(numpy.finfo(array.dtype).eps) if numpy.issubdtype(array.dtype, numpy.floating) else 0.0
    return float(numpy.abs(array).max()), eps


def mc_passes(job, params):
    """Runs the fixture's MC loops (original and fixed) and reports, per loop, whether the passes differ.

    params: input ([shape] of the invented test batch), loader (optional batch size: `loader` is a DataLoader over x
    with dummy labels), weights (optional {entry, build, input}: a checkpoint
    `weights`), runs: list of {name, model_class (a workspace class name or a torch.nn class), call (statements
    setting `r`, run with `m` = the entry module; null when the entry runs its loops at load, as a notebook does),
    segments (pass counts of the loops, the last calls in order), spreads (optional expressions on `r`, one per
    segment, giving the spread the fixture itself returns)}.
    """
    out = {}
    classes = {run["model_class"] for run in params["runs"]}
    for which in ("original", "fixed"):
        if which == "fixed" and not job.has_fixed():
            continue
        weights = save_weights(job, which, params["weights"]) if params.get("weights") else None
        torch.manual_seed(SEED + 1)
        x = torch.randn(*params["input"])
        loader = None
        if params.get("loader"):
            labels = torch.zeros(x.shape[0], dtype=torch.long)
            loader = torch.utils.data.DataLoader(torch.utils.data.TensorDataset(x, labels), batch_size=params["loader"])
        results = {}
        with PassRecorder(classes) as recorder:
            at_load = any(run.get("call") is None for run in params["runs"])
            recorder.recording = at_load
            m = job.load(which, fresh=True)
            recorder.recording = False
            for run in params["runs"]:
                if run.get("call") is not None:
                    recorder.calls = []
                    namespace = {"m": m, "x": x, "torch": torch, "F": F, "weights": weights, "loader": loader}
                    recorder.recording = True
                    torch.manual_seed(SEED + 2)
                    try:
                        exec(run["call"], namespace)
                    finally:
                        recorder.recording = False
                    r = namespace.get("r")
                else:
                    r = None
                calls = [c for c in recorder.calls if c["class"] == run["model_class"]]
                segments = []
                end = len(calls)
                start = end - sum(run["segments"])
                if start < 0:
                    raise RuntimeError("%s: %d passes recorded, %d expected" % (run["name"], end, sum(run["segments"])))
                spreads = run.get("spreads") or [None] * len(run["segments"])
                for count, spread_expr in zip(run["segments"], spreads):
                    value = as_magnitude(eval(spread_expr, {"r": r, "torch": torch})) if spread_expr else None
                    segments.append(segment_numbers(calls[start:start + count], value))
                    start += count
                results[run["name"]] = {"recorded": len(calls), "segments": segments}
        out[which] = results
    return out


# ---------------------------------------------------------------------------------------------------------------
# Registry and main.

SCENARIOS = {
    "sigma-descent": sigma_descent,
    "mc-functions": mc_functions,
    "worked-example": worked_example,
    "notebook-predictive": notebook_predictive,
    "ensemble-functions": ensemble_functions,
    "elbo-weight": elbo_weight,
    "noise-sign-flip": noise_sign_flip,
    "noise-variance": noise_variance,
    "mc-passes": mc_passes,
}


def main():
    with open(sys.argv[1], encoding="utf-8") as handle:
        jobs = json.load(handle)
    results = []
    real_stdout = sys.stdout
    for spec in jobs:
        entry = {"id": spec["id"], "ok": True}
        try:
            with contextlib.redirect_stdout(sys.stderr):
                entry["result"] = SCENARIOS[spec["scenario"]](Job(spec), spec.get("params") or {})
        except Exception:
            entry["ok"] = False
            entry["error"] = traceback.format_exc(limit=6)
        results.append(entry)
    real_stdout.write(json.dumps({"python": sys.version.split()[0], "torch": torch.__version__, "results": results}))
    real_stdout.write("\n")


if __name__ == "__main__":
    main()
