// logit-space-average: predictions of repeated stochastic passes or ensemble members averaged over the sample
// axis while still logits (or log-probabilities) and then used as the predictive distribution.
import {
  type Binding,
  type ClassInfo,
  defineRule,
  type Figure,
  type Fix,
  formatNumber,
  type FunctionInfo,
  type RuleContext,
  type Semantics,
  type SyntaxNode,
  type TextEdit,
  unwrapParens,
} from '../../server/src/engine/api';

/** What one sample holds: probabilities, log-probabilities, unnormalised outputs (logits or regression values), or unknown. */
export type OutputKind = 'probs' | 'logprobs' | 'raw' | 'unknown';

/** The kind of a value, with per-element kinds when it is a tuple (`return logits, kl`). */
interface KindInfo {
  kind: OutputKind;
  parts?: KindInfo[];
}

const UNKNOWN: KindInfo = { kind: 'unknown' };

/** Normalising functions by qualified name, with what they produce. */
const NORMALISERS: Record<string, { produces: 'probs' | 'logprobs'; family: 'softmax' | 'sigmoid' }> = {
  'torch.nn.functional.softmax': { produces: 'probs', family: 'softmax' },
  'torch.softmax': { produces: 'probs', family: 'softmax' },
  'torch.special.softmax': { produces: 'probs', family: 'softmax' },
  'scipy.special.softmax': { produces: 'probs', family: 'softmax' },
  'jax.nn.softmax': { produces: 'probs', family: 'softmax' },
  'tensorflow.nn.softmax': { produces: 'probs', family: 'softmax' },
  'tensorflow.math.softmax': { produces: 'probs', family: 'softmax' },
  'torch.nn.functional.log_softmax': { produces: 'logprobs', family: 'softmax' },
  'torch.log_softmax': { produces: 'logprobs', family: 'softmax' },
  'torch.special.log_softmax': { produces: 'logprobs', family: 'softmax' },
  'scipy.special.log_softmax': { produces: 'logprobs', family: 'softmax' },
  'jax.nn.log_softmax': { produces: 'logprobs', family: 'softmax' },
  'tensorflow.nn.log_softmax': { produces: 'logprobs', family: 'softmax' },
  'tensorflow.math.log_softmax': { produces: 'logprobs', family: 'softmax' },
  'torch.sigmoid': { produces: 'probs', family: 'sigmoid' },
  'torch.nn.functional.sigmoid': { produces: 'probs', family: 'sigmoid' },
  'torch.special.expit': { produces: 'probs', family: 'sigmoid' },
  'scipy.special.expit': { produces: 'probs', family: 'sigmoid' },
  'jax.nn.sigmoid': { produces: 'probs', family: 'sigmoid' },
  'tensorflow.sigmoid': { produces: 'probs', family: 'sigmoid' },
  'tensorflow.math.sigmoid': { produces: 'probs', family: 'sigmoid' },
  'tensorflow.nn.sigmoid': { produces: 'probs', family: 'sigmoid' },
  'torch.nn.functional.logsigmoid': { produces: 'logprobs', family: 'sigmoid' },
  'jax.nn.log_sigmoid': { produces: 'logprobs', family: 'sigmoid' },
  'tensorflow.math.log_sigmoid': { produces: 'logprobs', family: 'sigmoid' },
};

/** Normalising tensor methods (`x.softmax(-1)`). */
const NORMALISER_METHODS: Record<string, { produces: 'probs' | 'logprobs'; family: 'softmax' | 'sigmoid' }> = {
  softmax: { produces: 'probs', family: 'softmax' },
  log_softmax: { produces: 'logprobs', family: 'softmax' },
  sigmoid: { produces: 'probs', family: 'sigmoid' },
};

/** Functions whose result is an unnormalised linear output. */
const RAW_FUNCTIONS = new Set(['torch.nn.functional.linear', 'torch.nn.functional.bilinear', 'torch.matmul', 'torch.mm', 'torch.bmm', 'torch.addmm', 'torch.einsum', 'torch.nn.functional.conv1d', 'torch.nn.functional.conv2d', 'torch.nn.functional.conv3d', 'jax.numpy.dot', 'jax.numpy.matmul', 'tensorflow.matmul']);

/** Layers whose output is an unnormalised linear output (unless a Keras `activation=` says otherwise). */
const RAW_MODULES = new Set([
  'torch.nn.Linear',
  'torch.nn.LazyLinear',
  'torch.nn.Bilinear',
  'torch.nn.Conv1d',
  'torch.nn.Conv2d',
  'torch.nn.Conv3d',
  'torch.nn.ConvTranspose1d',
  'torch.nn.ConvTranspose2d',
  'torch.nn.ConvTranspose3d',
  'torch.nn.LazyConv1d',
  'torch.nn.LazyConv2d',
  'torch.nn.modules.linear.Linear',
  'flax.linen.Dense',
  'flax.linen.DenseGeneral',
  'flax.linen.Conv',
  'flax.nnx.Linear',
  'tensorflow.keras.layers.Dense',
  'keras.layers.Dense',
  'tensorflow_probability.layers.DenseFlipout',
  'tensorflow_probability.layers.DenseReparameterization',
  'tensorflow_probability.layers.DenseLocalReparameterization',
]);

/** Layers that normalise. */
const NORMALISING_MODULES: Record<string, 'probs' | 'logprobs'> = {
  'torch.nn.Softmax': 'probs',
  'torch.nn.Softmax2d': 'probs',
  'torch.nn.Sigmoid': 'probs',
  'torch.nn.LogSoftmax': 'logprobs',
  'torch.nn.LogSigmoid': 'logprobs',
  'tensorflow.keras.layers.Softmax': 'probs',
  'keras.layers.Softmax': 'probs',
};

/** Layers that leave the values they get unchanged at prediction time (looked through at the end of a Sequential). */
const TRANSPARENT_MODULES = new Set(['torch.nn.Dropout', 'torch.nn.Dropout1d', 'torch.nn.Dropout2d', 'torch.nn.Dropout3d', 'torch.nn.AlphaDropout', 'torch.nn.FeatureAlphaDropout', 'torch.nn.Identity', 'torch.nn.Flatten', 'torch.nn.Unflatten', 'tensorflow.keras.layers.Dropout', 'keras.layers.Dropout', 'tensorflow.keras.layers.Flatten', 'keras.layers.Flatten', 'flax.linen.Dropout']);

/** Containers that apply their elements in order. */
const SEQUENTIAL_MODULES = new Set(['torch.nn.Sequential', 'tensorflow.keras.Sequential', 'keras.Sequential', 'tensorflow.keras.models.Sequential', 'keras.models.Sequential', 'flax.linen.Sequential']);

/** Keras activation layers: `Activation("softmax")`. */
const ACTIVATION_LAYERS = new Set(['tensorflow.keras.layers.Activation', 'keras.layers.Activation']);

/** Tensor methods that keep the values (and so the kind) of their receiver. */
const PASS_METHODS = new Set(['view', 'reshape', 'squeeze', 'unsqueeze', 'flatten', 'contiguous', 'detach', 'cpu', 'cuda', 'to', 'float', 'double', 'half', 'clone', 'numpy', 'permute', 'transpose', 't', 'view_as', 'reshape_as', 'type', 'type_as', 'requires_grad_']);

/** Functions that keep the values of their first argument. */
const PASS_FUNCTIONS = new Set(['torch.squeeze', 'torch.unsqueeze', 'torch.flatten', 'torch.reshape', 'torch.transpose', 'torch.permute', 'numpy.asarray', 'numpy.array', 'numpy.squeeze', 'jax.numpy.asarray', 'jax.numpy.squeeze', 'copy.deepcopy']);

/** Averages over an axis: `torch.mean(x, dim)` and friends (the first argument is averaged). */
const MEAN_FUNCTIONS = new Set(['torch.mean', 'torch.nanmean', 'numpy.mean', 'numpy.nanmean', 'numpy.average', 'jax.numpy.mean', 'jax.numpy.average', 'tensorflow.reduce_mean', 'tensorflow.math.reduce_mean']);

/** Sums over an axis (an average when divided by the count). */
const SUM_FUNCTIONS = new Set(['torch.sum', 'torch.nansum', 'numpy.sum', 'jax.numpy.sum', 'tensorflow.reduce_sum', 'tensorflow.math.reduce_sum']);

/** Stacking functions: a new axis (the sample axis) at `dim`/`axis`. */
const STACK_FUNCTIONS = new Set(['torch.stack', 'numpy.stack', 'jax.numpy.stack', 'tensorflow.stack']);

/** Concatenations: a sample axis only when every element was given a new axis of length one first. */
const CAT_FUNCTIONS = new Set(['torch.cat', 'torch.concat', 'torch.concatenate', 'numpy.concatenate', 'jax.numpy.concatenate', 'tensorflow.concat']);

/** Tensor factories whose result a loop may fill sample by sample (`preds[t] = model(x)`). */
const FILL_FACTORIES = new Set(['torch.zeros', 'torch.empty', 'torch.ones', 'torch.full', 'numpy.zeros', 'numpy.empty', 'numpy.ones', 'numpy.full']);

/** Array constructors that stack a list along a new first axis. */
const ARRAY_FUNCTIONS = new Set(['numpy.array', 'numpy.asarray', 'jax.numpy.array', 'jax.numpy.asarray']);

/** Prediction by the largest score. */
const ARGMAX_FUNCTIONS = new Set(['torch.argmax', 'torch.max', 'torch.topk', 'numpy.argmax', 'jax.numpy.argmax', 'tensorflow.argmax', 'tensorflow.math.argmax']);
const ARGMAX_METHODS = new Set(['argmax', 'max', 'topk']);

/** Losses by what their input is: logits of a softmax, a binary logit, or log-probabilities. */
const LOSS_FUNCTIONS: Record<string, 'softmax' | 'sigmoid' | 'logprob'> = {
  'torch.nn.functional.cross_entropy': 'softmax',
  'optax.softmax_cross_entropy': 'softmax',
  'optax.softmax_cross_entropy_with_integer_labels': 'softmax',
  'tensorflow.nn.softmax_cross_entropy_with_logits': 'softmax',
  'tensorflow.nn.sparse_softmax_cross_entropy_with_logits': 'softmax',
  'torch.nn.functional.binary_cross_entropy_with_logits': 'sigmoid',
  'optax.sigmoid_binary_cross_entropy': 'sigmoid',
  'tensorflow.nn.sigmoid_cross_entropy_with_logits': 'sigmoid',
  'torch.nn.functional.nll_loss': 'logprob',
};
const LOSS_MODULES: Record<string, 'softmax' | 'sigmoid' | 'logprob'> = {
  'torch.nn.CrossEntropyLoss': 'softmax',
  'torch.nn.BCEWithLogitsLoss': 'sigmoid',
  'torch.nn.NLLLoss': 'logprob',
};

/** Regression losses: a model whose outputs are fed to them predicts values, not logits. */
const REGRESSION_LOSSES = new Set(['torch.nn.functional.mse_loss', 'torch.nn.functional.l1_loss', 'torch.nn.functional.smooth_l1_loss', 'torch.nn.functional.huber_loss', 'torch.nn.functional.gaussian_nll_loss']);
const REGRESSION_LOSS_MODULES = new Set(['torch.nn.MSELoss', 'torch.nn.L1Loss', 'torch.nn.SmoothL1Loss', 'torch.nn.HuberLoss', 'torch.nn.GaussianNLLLoss']);
/** Distributions whose first argument (`loc`) is a predicted value. */
const LOCATION_DISTRIBUTIONS = new Set(['torch.distributions.Normal', 'torch.distributions.normal.Normal', 'torch.distributions.StudentT', 'torch.distributions.Laplace', 'pyro.distributions.Normal', 'pyro.distributions.StudentT']);

/** Distributions that take logits through the `logits=` keyword. */
const LOGIT_DISTRIBUTIONS: Record<string, 'softmax' | 'sigmoid'> = {
  'torch.distributions.Categorical': 'softmax',
  'torch.distributions.OneHotCategorical': 'softmax',
  'torch.distributions.Bernoulli': 'sigmoid',
  'pyro.distributions.Categorical': 'softmax',
  'pyro.distributions.OneHotCategorical': 'softmax',
  'pyro.distributions.Bernoulli': 'sigmoid',
  'tensorflow_probability.distributions.Categorical': 'softmax',
  'tensorflow_probability.distributions.Bernoulli': 'sigmoid',
};

/** Classification metrics (scikit-learn and torchmetrics functions and classes) by qualified name. */
const CLASSIFICATION_METRIC = /^(sklearn\.metrics|torchmetrics)(\.[\w]+)*\.(accuracy\w*|balanced_accuracy_score|top_k_accuracy_score|log_loss|roc_auc_score|roc_curve|average_precision_score|precision_recall_curve|f1_score|fbeta_score|precision_score|recall_score|brier_score_loss|confusion_matrix|classification_report|calibration_error|auroc|multiclass_\w+|binary_\w+|Accuracy|AUROC|F1Score|Precision|Recall|CalibrationError|ConfusionMatrix|MulticlassAccuracy|MulticlassCalibrationError|BinaryAccuracy)$/;

const MAX_DEPTH = 6;

/** Bound on nested resolution steps when deciding what a model returns (layers inside modules inside helpers). */
const KIND_DEPTH = 32;

/** How a sample set was formed. */
type SampleMode = 'mc' | 'ensemble' | 'listed' | 'vectorised';

/** The samples that an average runs over. */
interface SampleSet {
  mode: SampleMode;
  /** Kind of one sample (after any normalisation applied to it before the average). */
  kind: OutputKind;
  /** The callee of the model calls (for messages). */
  model: SyntaxNode;
  /** The expression that gives the number of samples, when there is one. */
  count: SyntaxNode | null;
  /** Literal text for the count when no expression exists but the number is known (a list of members). */
  countValue: number | null;
  /** Classes and bindings that identify the model (to find its outputs used for classification elsewhere). */
  models: ModelRef;
  /** True when the samples are numpy / JAX / TensorFlow arrays (no fix offered). */
  foreignArrays: boolean;
}

/** What identifies a model: its workspace classes and the bindings of the name it is called through. */
interface ModelRef {
  classes: Set<ClassInfo>;
  bindings: Set<Binding>;
}

/** One loop (a `for` statement or a comprehension) that produces samples. */
interface Loop {
  node: SyntaxNode;
  /** Identifiers bound by the loop target. */
  targets: SyntaxNode[];
  iterable: SyntaxNode | null;
  /** Where bindings count as "made inside the loop": the comprehension or the loop body. */
  body: SyntaxNode;
}

/** An average over the sample axis of a sample set. */
interface Average {
  /** The node reported (the average expression). */
  node: SyntaxNode;
  samples: SampleSet;
  /** How the average is written, for the fixes. */
  form:
    | { type: 'stacked'; operand: SyntaxNode; axis: number; keepdim: boolean }
    | { type: 'list-sum'; list: SyntaxNode }
    | { type: 'generator-sum'; generator: SyntaxNode; element: SyntaxNode }
    | { type: 'running' };
  /** For running sums: the binding whose later uses are the average. */
  binding?: Binding;
}

/** A use of the averaged value as a predictive distribution. */
interface PredictiveUse {
  kind: 'softmax' | 'sigmoid' | 'log_softmax' | 'distribution' | 'argmax' | 'threshold' | 'loss-softmax' | 'loss-sigmoid' | 'loss-logprob' | 'metric' | 'returned' | 'exp' | 'index' | 'regression';
  /** The consuming call or statement. */
  node: SyntaxNode;
  label: string;
  /** True when the average itself (through parentheses only) is the consumer's input. */
  direct: boolean;
  /** The class-dimension argument of the consumer, when it has one. */
  dim?: SyntaxNode | null;
}

/** The rule: averages of stochastic predictions taken in logit (or log-probability) space and used as the predictive. */
export const rule = defineRule({
  meta: {
    id: 'logit-space-average',
    title: 'Stochastic predictions averaged as logits instead of probabilities',
    family: 'mc-dropout',
    defaultSeverity: 'warning',
    status: { stage: 'experimental', since: '0.1.0' },
    fix: 'sometimes',
    messages: {
      logits:
        '{samples} are averaged over the sample axis while still logits, and the average is then {use}: the {normaliser} of the mean logit is not the mean of the per-sample probabilities, which is the MC / ensemble predictive. Apply {normaliser} to each sample before averaging (or take the log-mean-exp of the log-probabilities).',
      logprobs:
        '{samples} are log-probabilities averaged over the sample axis, and the average is then {use}: the mean of the log-probabilities is not the log of the predictive probability and is lower than it (Jensen). Use the log-mean-exp, `logsumexp(log_p, dim=0) - log(T)`.',
    },
    settings: [],
  },
  create(context) {
    const sem = context.sem;
    const reported = new Set<SyntaxNode>();

    /** Decides and reports one average. */
    function consider(average: Average | null): void {
      if (!average || reported.has(average.node)) return;
      const { samples } = average;
      if (samples.kind === 'probs') return;
      const uses = average.binding ? bindingUses(sem, average.binding, average.node) : predictiveUses(sem, average.node, 0, new Set());
      const decisive = decide(sem, samples, uses);
      if (!decisive) return;
      reported.add(average.node);
      const logprobs = samples.kind === 'logprobs';
      const binary = !logprobs && uses.some((u) => u.kind === 'sigmoid' || u.kind === 'loss-sigmoid' || u.kind === 'threshold' || (u.kind === 'distribution' && u.label.includes('Bernoulli')));
      context.report({
        node: average.node,
        messageId: logprobs ? 'logprobs' : 'logits',
        data: { samples: describeSamples(samples), use: decisive.label, normaliser: binary ? 'sigmoid' : 'softmax' },
        figures: figuresFor(sem, samples),
        fixes: fixesFor(context, average, uses, binary),
      });
    }

    return {
      call(node) {
        consider(meanAverage(sem, node));
      },
      binary_operator(node) {
        if (node.child('operator')?.text !== '/') return;
        consider(divisionAverage(sem, node));
      },
      augmented_assignment(node) {
        consider(runningAverage(sem, node));
      },
    };
  },
});

// ---------------------------------------------------------------------------------------------------------------
// Finding averages.

/** `S.mean(d)`, `torch.mean(S, d)`, `np.mean(S, axis=d)`: an average over axis d of S. */
function meanAverage(sem: Semantics, call: SyntaxNode): Average | null {
  const fn = call.child('function');
  if (!fn || fn.type !== 'attribute' || !/^(nan)?mean$|^average$|^reduce_mean$/.test(fn.child('attribute')?.text ?? '')) return null;
  const callee = sem.callee(call);
  let operand: SyntaxNode | null = null;
  let axisNode: SyntaxNode | null = null;
  let foreign = false;
  if (callee.qualifiedName && MEAN_FUNCTIONS.has(callee.qualifiedName)) {
    const torch = callee.qualifiedName.startsWith('torch');
    if (callee.qualifiedName.endsWith('.average') && sem.argument(call, 2, 'weights')) return null;
    operand = sem.argument(call, 0, torch ? 'input' : 'a');
    axisNode = sem.argument(call, 1, torch ? 'dim' : 'axis') ?? sem.argument(call, 1, 'axis');
    foreign = !torch;
  } else if ((callee.method === 'mean' || callee.method === 'nanmean') && callee.receiver && !callee.symbol) {
    operand = callee.receiver;
    axisNode = sem.argument(call, 0, 'dim') ?? sem.argument(call, 0, 'axis');
    if (!sem.argument(call, 99, 'dim') && sem.argument(call, 99, 'axis')) foreign = true;
  } else return null;
  if (!operand || !axisNode) return null;
  const axis = sem.fold(axisNode);
  if (typeof axis !== 'number' || !Number.isInteger(axis)) return null;
  const keep = sem.argument(call, 99, 'keepdim') ?? sem.argument(call, 99, 'keepdims');
  const stacked = stackedSamples(sem, operand, axis, 0);
  if (!stacked) return null;
  if (foreign) stacked.foreignArrays = true;
  return { node: call, samples: stacked, form: { type: 'stacked', operand, axis, keepdim: !!keep && sem.fold(keep) !== false } };
}

/** `sum(outs) / T`, `sum(f(x) for _ in range(T)) / T`, `S.sum(0) / T`, `acc / T` after a loop of `acc += f(x)`. */
function divisionAverage(sem: Semantics, div: SyntaxNode): Average | null {
  const left = div.child('left');
  if (!left) return null;
  const l = unwrapParens(left);
  if (l.type === 'call') {
    const callee = sem.callee(l);
    if (callee.qualifiedName === 'builtins.sum') {
      const args = l.child('arguments');
      if (args?.type === 'generator_expression') {
        const samples = listSamples(sem, args, 0);
        const element = args.child('body');
        if (!samples || !element) return null;
        return { node: div, samples, form: { type: 'generator-sum', generator: args, element } };
      }
      const list = sem.argument(l, 0);
      if (!list || sem.argument(l, 1, 'start')) return null;
      const samples = listSamples(sem, list, 0);
      if (!samples) return null;
      return { node: div, samples, form: { type: 'list-sum', list } };
    }
    let operand: SyntaxNode | null = null;
    let axisNode: SyntaxNode | null = null;
    if (callee.method === 'sum' && callee.receiver) {
      operand = callee.receiver;
      axisNode = sem.argument(l, 0, 'dim') ?? sem.argument(l, 0, 'axis');
    } else if (callee.qualifiedName && SUM_FUNCTIONS.has(callee.qualifiedName)) {
      operand = sem.argument(l, 0, 'input') ?? sem.argument(l, 0, 'a');
      axisNode = sem.argument(l, 1, 'dim') ?? sem.argument(l, 1, 'axis');
    }
    if (!operand || !axisNode) return null;
    const axis = sem.fold(axisNode);
    if (typeof axis !== 'number' || !Number.isInteger(axis)) return null;
    const samples = stackedSamples(sem, operand, axis, 0);
    if (!samples) return null;
    if (callee.qualifiedName && !callee.qualifiedName.startsWith('torch')) samples.foreignArrays = true;
    return { node: div, samples, form: { type: 'stacked', operand, axis, keepdim: false } };
  }
  if (l.type === 'identifier') {
    const samples = runningSum(sem, l, div);
    if (!samples) return null;
    return { node: div, samples, form: { type: 'running' } };
  }
  return null;
}

/** `acc /= T` after a loop of `acc += f(x)`, and `acc += f(x) / T` inside the loop (a running mean). */
function runningAverage(sem: Semantics, node: SyntaxNode): Average | null {
  const op = node.child('operator')?.text;
  const left = node.child('left');
  const right = node.child('right');
  if (!left || left.type !== 'identifier' || !right) return null;
  const module = sem.moduleOf(node);
  const own = module.bindingsIn(module.scopeOf(left), left.text).find((b) => b.node === left);
  if (!own) return null;
  if (op === '/=') {
    const samples = runningSum(sem, left, node);
    if (!samples) return null;
    return { node, samples, form: { type: 'running' }, binding: own };
  }
  if (op === '+=') {
    const r = unwrapParens(right);
    if (r.type !== 'binary_operator' || r.child('operator')?.text !== '/') return null;
    const element = r.child('left');
    const loop = enclosingLoop(node, null);
    if (!element || !loop) return null;
    const samples = elementSamples(sem, [{ element, loop }]);
    if (!samples) return null;
    return { node, samples, form: { type: 'running' }, binding: own };
  }
  return null;
}

/** The samples summed into `acc` by `acc += f(x)` (or `acc = acc + f(x)`) in a loop that ends before `at`. */
function runningSum(sem: Semantics, acc: SyntaxNode, at: SyntaxNode): SampleSet | null {
  const module = sem.moduleOf(acc);
  const bindings = module.lookup(acc.text, at).filter((b) => b.node !== acc);
  const parts: { element: SyntaxNode; loop: Loop }[] = [];
  for (const b of bindings) {
    let element: SyntaxNode | null = null;
    if (b.kind === 'augassign' && b.value?.child('operator')?.text === '+=') element = b.value.child('right');
    else if (b.kind === 'assign' && b.value) {
      const v = unwrapParens(b.value);
      if (v.type === 'binary_operator' && v.child('operator')?.text === '+' && unwrapParens(v.child('left') ?? v).text === acc.text) element = v.child('right');
    }
    if (!element) continue;
    const loop = enclosingLoop(b.node, null);
    if (!loop || loop.node.contains(at)) return null;
    parts.push({ element, loop });
  }
  if (parts.length === 0) return null;
  return elementSamples(sem, parts);
}

// ---------------------------------------------------------------------------------------------------------------
// Sample sets.

/** The samples of a tensor whose axis `axis` is a sample axis (a stack of per-sample outputs, or a vectorised one). */
function stackedSamples(sem: Semantics, operand: SyntaxNode, axis: number, depth: number): SampleSet | null {
  if (depth > MAX_DEPTH) return null;
  const node = unwrapParens(operand);
  const origins = valueOrigins(sem, node);
  // numpy averages a Python list of arrays as if it were stacked along a new first axis.
  const returnsList = (o: SyntaxNode): boolean => {
    const callee = o.type === 'call' ? sem.callee(o) : null;
    return callee?.symbol?.kind === 'function' && returnedElements(sem, callee.symbol.fn) !== null;
  };
  if (axis === 0 && origins.some((o) => ['list', 'list_comprehension'].includes(unwrapParens(o).type) || returnsList(unwrapParens(o)))) {
    const samples = listSamples(sem, node, depth + 1);
    if (samples) return { ...samples, foreignArrays: true };
  }
  for (const origin of origins) {
    const o = unwrapParens(origin);
    if (o.type !== 'call') continue;
    const callee = sem.callee(o);
    const q = callee.qualifiedName;
    if (q && FILL_FACTORIES.has(q) && axis === 0) {
      const filled = filledSamples(sem, o);
      if (filled) {
        if (!q.startsWith('torch')) filled.foreignArrays = true;
        return filled;
      }
      continue;
    }
    if (q && STACK_FUNCTIONS.has(q)) {
      const dimNode = sem.argument(o, 1, q.startsWith('torch') ? 'dim' : 'axis');
      const dim = dimNode ? sem.fold(dimNode) : 0;
      const list = sem.argument(o, 0);
      if (dim !== axis || !list) continue;
      const samples = listSamples(sem, list, depth + 1);
      if (!samples) continue;
      if (!q.startsWith('torch')) samples.foreignArrays = true;
      return samples;
    }
    if (q && CAT_FUNCTIONS.has(q)) {
      const dimNode = sem.argument(o, 1, q.startsWith('torch') ? 'dim' : 'axis');
      const dim = dimNode ? sem.fold(dimNode) : 0;
      const list = sem.argument(o, 0);
      if (dim !== axis || !list) continue;
      const samples = listSamples(sem, list, depth + 1, axis);
      if (!samples) continue;
      if (!q.startsWith('torch')) samples.foreignArrays = true;
      return samples;
    }
    if (q && ARRAY_FUNCTIONS.has(q) && axis === 0) {
      const list = sem.argument(o, 0);
      const samples = list ? listSamples(sem, list, depth + 1) : null;
      if (!samples) continue;
      samples.foreignArrays = true;
      return samples;
    }
    // A normalisation applied to the whole stack keeps its sample axis and sets the kind.
    const normaliser = normaliserOf(sem, o);
    if (normaliser) {
      const inner = stackedSamples(sem, normaliser.input, axis, depth + 1);
      if (inner) return { ...inner, kind: normaliser.produces };
      continue;
    }
    if (callee.method && callee.receiver && PASS_METHODS.has(callee.method) && callee.method !== 'view' && callee.method !== 'reshape' && callee.method !== 'unsqueeze' && callee.method !== 'squeeze' && callee.method !== 'permute' && callee.method !== 'transpose' && callee.method !== 't') {
      const inner = stackedSamples(sem, callee.receiver, axis, depth + 1);
      if (inner) return inner;
      continue;
    }
    // A workspace helper that returns a stack of samples (`def member_outputs(ens, x): return torch.stack([...])`).
    if (callee.symbol?.kind === 'function') {
      const returned = returnedStack(sem, callee.symbol.fn, axis);
      if (returned) return { ...returned, models: mergeRefs([returned.models]) };
    }
    const vectorised = vectorisedSamples(sem, o, axis);
    if (vectorised) return vectorised;
  }
  return null;
}

/**
 * The function summary "returns a stack of samples along `axis`": the sample set of the first of its returns that
 * is one, decided inside the function (its parameters stand for whatever the callers pass), memoised per function.
 */
function returnedStack(sem: Semantics, fn: FunctionInfo, axis: number): SampleSet | null {
  const memo = sem.workspace.memoTable<FunctionInfo, Map<number, SampleSet | null>>('logit-space-average:returned-stack');
  let perAxis = memo.get(fn);
  if (!perAxis) {
    perAxis = new Map();
    memo.set(fn, perAxis);
  }
  if (perAxis.has(axis)) return perAxis.get(axis)!;
  // Recursion (a helper that returns its own result) ends here with "no stack".
  perAxis.set(axis, null);
  let found: SampleSet | null = null;
  for (const r of fn.returns) {
    const node = unwrapParens(r);
    if (node.type === 'tuple' || node.type === 'expression_list') continue;
    found = stackedSamples(sem, node, axis, 0);
    if (found) break;
  }
  perAxis.set(axis, found);
  return found;
}

/** The function summary "returns a list of samples": the elements of every return, memoised per function (null when any return is not a list of samples). */
function returnedElements(sem: Semantics, fn: FunctionInfo): { element: SyntaxNode; loop: Loop | null }[] | null {
  const memo = sem.workspace.memoTable<FunctionInfo, { element: SyntaxNode; loop: Loop | null }[] | null>('logit-space-average:returned-list');
  if (memo.has(fn)) return memo.get(fn)!;
  memo.set(fn, null);
  const out: { element: SyntaxNode; loop: Loop | null }[] = [];
  for (const r of fn.returns) {
    const parts = listElements(sem, r, 0);
    if (!parts) {
      out.length = 0;
      break;
    }
    out.push(...parts);
  }
  const result = fn.returns.length > 0 && out.length > 0 ? out : null;
  memo.set(fn, result);
  return result;
}

/** A preallocated tensor filled by a loop, one sample per index: `preds = torch.zeros(T, B, C)`; `preds[t] = model(x)`. */
function filledSamples(sem: Semantics, factory: SyntaxNode): SampleSet | null {
  const binding = bindingOfValue(sem, factory);
  if (!binding) return null;
  const statement = binding.node.closest('expression_statement') ?? binding.node;
  const parts: { element: SyntaxNode; loop: Loop }[] = [];
  for (const use of identifierUses(sem, binding)) {
    const subscript = use.parent;
    if (subscript?.type !== 'subscript' || use.field !== 'value') continue;
    const assignment = subscript.parent;
    if (assignment?.type !== 'assignment' || subscript.field !== 'left') continue;
    const index = subscript.childrenOf('subscript')[0];
    const element = assignment.child('right');
    const loop = enclosingLoop(use, statement);
    if (!index || !element || !loop) return null;
    // The first index must be the loop's own counter: one sample per pass.
    if (index.type !== 'identifier' || !loop.targets.some((t) => t.text === index.text)) return null;
    parts.push({ element, loop });
  }
  return parts.length ? elementSamples(sem, parts) : null;
}

/** A tensor of T copies of one input: along a new axis, or folded into the batch axis (T-major or batch-major). */
interface Tiling {
  /** The axis that holds the copies (for folded tilings, the axis the copies take once the output is unfolded). */
  axis: number;
  count: SyntaxNode | null;
  /** `repeat`: the batch repeated T times (T-major); `interleave`: each row repeated T times (batch-major). */
  folded: 'repeat' | 'interleave' | null;
}

/** Methods that keep a tensor's shape and values (looked through on the way from the tiling to the model). */
const SHAPE_KEEPING_METHODS = new Set(['contiguous', 'to', 'float', 'double', 'half', 'cuda', 'cpu', 'detach', 'clone', 'requires_grad_', 'type', 'type_as']);

/**
 * A model called once on T copies of its input, with the copies along an axis of the output:
 * `model(x.unsqueeze(0).expand(T, *x.shape))`, `model(x[None].repeat(T, 1, 1))`, `model(torch.stack([x] * T))`,
 * `model(einops.repeat(x, 'b d -> t b d', t=T))`, or a batch-folded call unfolded afterwards,
 * `model(x.repeat(T, 1)).view(T, B, -1)` and `model(x.repeat_interleave(T, dim=0)).view(B, T, -1)`.
 */
function vectorisedSamples(sem: Semantics, call: SyntaxNode, axis: number): SampleSet | null {
  const callee = sem.callee(call);
  // The copies were folded into the batch axis for the call, and the output is unfolded into (T, B, ...) or (B, T, ...).
  const unfolded = unfoldedSizes(sem, call);
  if (unfolded) {
    for (const origin of valueOrigins(sem, callee.receiver!)) {
      const o = unwrapParens(origin);
      if (o.type !== 'call' || !isModelLikeCall(sem, o)) continue;
      const input = modelInput(sem, o);
      const tiling = input ? tilingOf(sem, input, 0) : null;
      if (!tiling?.folded || !tiling.count || tiling.axis !== axis) continue;
      const size = unfolded[tiling.axis];
      if (size && sameCount(sem, size, tiling.count)) return modelSample(sem, o, 'vectorised', tiling.count);
    }
    return null;
  }
  if (!isModelLikeCall(sem, call)) return null;
  const input = modelInput(sem, call);
  const tiling = input ? tilingOf(sem, input, 0) : null;
  if (!tiling || tiling.folded || tiling.axis !== axis) return null;
  return modelSample(sem, call, 'vectorised', tiling.count);
}

/** The sizes a reshape of a batch-folded output unfolds its first axis into: `.view(T, B, -1)`, `.reshape(...)`, `.unflatten(0, (T, B))`. */
function unfoldedSizes(sem: Semantics, call: SyntaxNode): SyntaxNode[] | null {
  const callee = sem.callee(call);
  if (!callee.receiver || callee.symbol) return null;
  if (callee.method === 'view' || callee.method === 'reshape') {
    const args = positionalArguments(call);
    if (args.length === 1 && ['tuple', 'list'].includes(unwrapParens(args[0]!).type)) return unwrapParens(args[0]!).namedChildren;
    return args.length >= 2 ? args : null;
  }
  if (callee.method === 'unflatten') {
    const dim = sem.argument(call, 0, 'dim');
    const sizes = sem.argument(call, 1, 'sizes');
    if (!dim || sem.fold(dim) !== 0 || !sizes || !['tuple', 'list'].includes(unwrapParens(sizes).type)) return null;
    return unwrapParens(sizes).namedChildren;
  }
  return null;
}

/** True for a call that may be a model (a module, a workspace function or method), not a library function such as `torch.relu`. */
function isModelLikeCall(sem: Semantics, call: SyntaxNode): boolean {
  const callee = sem.callee(call);
  if (callee.qualifiedName && (!callee.symbol || callee.symbol.kind === 'external') && /^[a-z_]/.test(callee.qualifiedName.split('.').pop() ?? '')) return false;
  if (callee.method && callee.receiver && !callee.symbol && (PASS_METHODS.has(callee.method) || SHAPE_KEEPING_METHODS.has(callee.method) || /^(expand|expand_as|repeat|repeat_interleave|tile|mean|nanmean|sum|softmax|log_softmax|sigmoid)$/.test(callee.method))) return false;
  return positionalArguments(call).length > 0;
}

/** The copies a value is made of, when it is T copies of one tensor (followed through names and shape-keeping methods). */
function tilingOf(sem: Semantics, expr: SyntaxNode, depth: number): Tiling | null {
  if (depth > MAX_DEPTH) return null;
  for (const origin of valueOrigins(sem, expr)) {
    const o = unwrapParens(origin);
    if (o.type !== 'call') continue;
    const callee = sem.callee(o);
    const q = callee.qualifiedName;
    const method = callee.receiver && !callee.symbol && !q ? callee.method : null;
    if (method && SHAPE_KEEPING_METHODS.has(method)) {
      const inner = tilingOf(sem, callee.receiver!, depth + 1);
      if (inner) return inner;
      continue;
    }
    // A tiling along a new axis flattened into the batch axis: `xs.reshape(T * B, -1)`, `xs.flatten(0, 1)`.
    if (method === 'view' || method === 'reshape' || method === 'flatten') {
      const inner = tilingOf(sem, callee.receiver!, depth + 1);
      if (inner && !inner.folded && (inner.axis === 0 || inner.axis === 1)) return { axis: inner.axis, count: inner.count, folded: inner.axis === 0 ? 'repeat' : 'interleave' };
      continue;
    }
    const tiled = method ? methodTiling(sem, o, method, callee.receiver!) : q ? functionTiling(sem, o, q) : null;
    if (tiled) return tiled;
  }
  return null;
}

/** `R.expand(...)`, `R.repeat(...)`, `R.tile(...)`, `R.expand_as(Y)`, `R.repeat_interleave(T, dim=d)` as a tiling. */
function methodTiling(sem: Semantics, call: SyntaxNode, method: string, receiver: SyntaxNode): Tiling | null {
  if (!['expand', 'repeat', 'tile', 'expand_as', 'repeat_interleave'].includes(method)) return null;
  let args = positionalArguments(call);
  if (args.length === 1 && ['tuple', 'list'].includes(unwrapParens(args[0]!).type) && method !== 'repeat_interleave') args = unwrapParens(args[0]!).namedChildren;
  const at = (index: number): SyntaxNode | null => {
    for (let i = 0; i <= index; i++) if (!args[i] || args[i]!.type === 'list_splat') return null;
    return args[index]!;
  };
  const newAxis = newAxisIndex(sem, receiver);
  if (method === 'repeat_interleave') {
    const count = sem.argument(call, 0, 'repeats');
    const dimNode = sem.argument(call, 1, 'dim');
    const dim = dimNode ? sem.fold(dimNode) : null;
    if (!count || typeof dim !== 'number') return null;
    if (newAxis !== null) return dim === newAxis ? { axis: newAxis, count, folded: null } : null;
    return dim === 0 ? { axis: 1, count, folded: 'interleave' } : null;
  }
  if (newAxis !== null) {
    if (method === 'expand_as') return { axis: newAxis, count: null, folded: null };
    const count = at(newAxis);
    if (args.some((a, i) => a.type === 'list_splat' && i <= newAxis)) return { axis: newAxis, count: null, folded: null };
    return count && sem.fold(count) !== 1 ? { axis: newAxis, count, folded: null } : null;
  }
  const first = at(0);
  if (!first || sem.fold(first) === 1) return null;
  // `x.expand(T, *x.shape)`: more sizes than the tensor has axes, so the first is a new leading axis.
  if (method === 'expand' && args[1]?.type === 'list_splat' && isShapeOf(sem, args[1]!)) return { axis: 0, count: first, folded: null };
  // `x.repeat(T, 1)`, `x.tile((T, 1))`: the batch repeated T times along the batch axis.
  if ((method === 'repeat' || method === 'tile') && args.length >= 2 && args.slice(1).every((a) => a.type !== 'list_splat' && sem.fold(a) === 1)) return { axis: 0, count: first, folded: 'repeat' };
  return null;
}

/** Tilings made by library functions: `torch.stack([x] * T)`, `torch.repeat_interleave(x, T, dim=0)`, `einops.repeat(x, 'b d -> t b d', t=T)`. */
function functionTiling(sem: Semantics, call: SyntaxNode, q: string): Tiling | null {
  if (q === 'torch.stack') {
    const list = sem.argument(call, 0, 'tensors');
    const dimNode = sem.argument(call, 1, 'dim');
    const dim = dimNode ? sem.fold(dimNode) : 0;
    if (!list || typeof dim !== 'number' || dim < 0) return null;
    const count = copiesOfOne(sem, list);
    return count ? { axis: dim, count, folded: null } : null;
  }
  if (q === 'torch.repeat_interleave') {
    const input = sem.argument(call, 0, 'input');
    const count = sem.argument(call, 1, 'repeats');
    const dimNode = sem.argument(call, 2, 'dim');
    if (!input || !count || !dimNode) return null;
    const dim = sem.fold(dimNode);
    const newAxis = newAxisIndex(sem, input);
    if (newAxis !== null) return dim === newAxis ? { axis: newAxis, count, folded: null } : null;
    return dim === 0 ? { axis: 1, count, folded: 'interleave' } : null;
  }
  if (q === 'einops.repeat') return einopsTiling(sem, call);
  return null;
}

/** `[x] * T`, `T * [x]`, `[x for _ in range(T)]` (the element not depending on the loop): T. */
function copiesOfOne(sem: Semantics, list: SyntaxNode): SyntaxNode | null {
  const node = unwrapParens(list);
  if (node.type === 'binary_operator' && node.child('operator')?.text === '*') {
    const left = unwrapParens(node.child('left')!);
    const right = unwrapParens(node.child('right')!);
    for (const [items, count] of [
      [left, right],
      [right, left],
    ] as const) {
      if ((items.type === 'list' || items.type === 'tuple') && items.namedChildren.length === 1 && items.namedChildren[0]!.type !== 'list_splat' && sem.fold(count) !== 1) return count;
    }
    return null;
  }
  if (node.type === 'list_comprehension' || node.type === 'generator_expression') {
    const clauses = node.children.filter((c) => c.type === 'for_in_clause');
    const body = node.child('body');
    if (clauses.length !== 1 || !body || node.children.some((c) => c.type === 'if_clause')) return null;
    const loop = comprehensionLoop(node, clauses[0]!);
    const b = unwrapParens(body);
    // Only the input itself, not a call on it (a list of model calls is a stack of samples, handled elsewhere).
    if ((b.type !== 'identifier' && b.type !== 'attribute') || dependsOnLoop(sem, b, loop)) return null;
    return rangeCount(sem, loop.iterable);
  }
  return null;
}

/** `einops.repeat(x, 'b d -> t b d', t=T)`: one new axis on the output side, standing alone or first in a group with the batch axis. */
function einopsTiling(sem: Semantics, call: SyntaxNode): Tiling | null {
  const patternNode = sem.argument(call, 1, 'pattern');
  const pattern = patternNode ? sem.fold(patternNode) : null;
  if (typeof pattern !== 'string' || !pattern.includes('->')) return null;
  const [lhs, rhs] = pattern.split('->') as [string, string];
  const inputAxes = new Set(lhs.replace(/[()]/g, ' ').split(/\s+/).filter(Boolean));
  const groups = (rhs.match(/\([^)]*\)|\S+/g) ?? []).map((g) => g.replace(/[()]/g, ' ').split(/\s+/).filter(Boolean));
  const fresh = groups.flat().filter((a) => !inputAxes.has(a) && a !== '1' && a !== '...' && !/^\d+$/.test(a));
  if (fresh.length !== 1) return null;
  const name = fresh[0]!;
  const count = sem.argument(call, 99, name);
  if (!count) return null;
  const index = groups.findIndex((g) => g.includes(name));
  if (groups.slice(0, index).some((g) => g.includes('...'))) return null;
  const group = groups[index]!;
  if (group.length === 1) return { axis: index, count, folded: null };
  if (index !== 0 || group.length !== 2) return null;
  return { axis: group[0] === name ? 0 : 1, count, folded: group[0] === name ? 'repeat' : 'interleave' };
}

/** The axis at which an expression adds an axis of length one (`x.unsqueeze(d)`, `x[None]`, `x[:, None]`), or null. */
function newAxisIndex(sem: Semantics, expr: SyntaxNode): number | null {
  for (const origin of valueOrigins(sem, expr)) {
    const o = unwrapParens(origin);
    if (o.type === 'call') {
      const c = sem.callee(o);
      const dim = c.method === 'unsqueeze' && !c.qualifiedName ? sem.argument(o, 0, 'dim') : c.qualifiedName === 'torch.unsqueeze' ? sem.argument(o, 1, 'dim') : null;
      const d = dim ? sem.fold(dim) : null;
      if (typeof d === 'number' && Number.isInteger(d) && d >= 0) return d;
      // `x.view(1, *x.shape)`, `x.reshape(1, *x.shape)`.
      if ((c.method === 'view' || c.method === 'reshape') && !c.qualifiedName) {
        const args = positionalArguments(o);
        if (args.length === 2 && sem.fold(args[0]!) === 1 && args[1]!.type === 'list_splat' && isShapeOf(sem, args[1]!)) return 0;
      }
    }
    if (o.type === 'subscript') {
      const index = o.childrenOf('subscript');
      const at = index.findIndex((i) => i.type === 'none');
      if (at >= 0 && index.slice(0, at).every((i) => i.type === 'slice' && i.namedChildren.length === 0)) return at;
    }
  }
  return null;
}

/** True for `*x.shape` / `*x.size()` (a splat of a tensor's sizes). */
function isShapeOf(sem: Semantics, splat: SyntaxNode): boolean {
  const inner = splat.namedChildren[0];
  if (!inner) return false;
  const n = unwrapParens(inner);
  if (n.type === 'attribute') return n.child('attribute')?.text === 'shape';
  if (n.type === 'call') return sem.callee(n).method === 'size' && positionalArguments(n).length === 0;
  return false;
}

/** True when two count expressions are the same count (the same text, or the same folded number). */
function sameCount(sem: Semantics, a: SyntaxNode, b: SyntaxNode): boolean {
  if (unwrapParens(a).text.replace(/\s+/g, '') === unwrapParens(b).text.replace(/\s+/g, '')) return true;
  const x = sem.fold(a);
  const y = sem.fold(b);
  return typeof x === 'number' && x === y;
}

/** The positional arguments of a call, splats included, in order. */
function positionalArguments(call: SyntaxNode): SyntaxNode[] {
  return (call.child('arguments')?.namedChildren ?? []).filter((a) => a.type !== 'keyword_argument' && a.type !== 'dictionary_splat');
}

/** The first positional argument of a call that is not a parameter set (`model.apply(params, x)` → x). */
function modelInput(sem: Semantics, call: SyntaxNode): SyntaxNode | null {
  const callee = sem.callee(call);
  if (callee.method === 'apply') return sem.argument(call, 1);
  return sem.argument(call, 0);
}

/** The elements of a list of samples and the loops that produce them. */
function listSamples(sem: Semantics, list: SyntaxNode, depth: number, catAxis?: number): SampleSet | null {
  const parts = listElements(sem, list, depth);
  if (!parts || parts.length === 0) return null;
  if (catAxis !== undefined) {
    // A concatenation is a stack only when every element got a new axis of length one at the same place.
    for (const p of parts) {
      const e = unwrapParens(p.element);
      const c = e.type === 'call' ? sem.callee(e) : null;
      const dim = e.type === 'call' ? sem.argument(e, 0, 'dim') : null;
      const newAxis = (c?.method === 'unsqueeze' && dim && sem.fold(dim) === catAxis) || (catAxis === 0 && e.type === 'subscript' && e.childrenOf('subscript')[0]?.type === 'none');
      if (!newAxis) return null;
    }
  }
  return elementSamples(sem, parts);
}

/** Where the elements of a list come from: a comprehension, appends in a loop, or a literal list of model calls. */
function listElements(sem: Semantics, list: SyntaxNode, depth: number): { element: SyntaxNode; loop: Loop | null }[] | null {
  if (depth > MAX_DEPTH) return null;
  const node = unwrapParens(list);
  if (node.type === 'list_comprehension' || node.type === 'generator_expression') {
    const clauses = node.children.filter((c) => c.type === 'for_in_clause');
    const body = node.child('body');
    if (clauses.length !== 1 || !body) return null;
    return [{ element: body, loop: comprehensionLoop(node, clauses[0]!) }];
  }
  if (node.type === 'list' || node.type === 'tuple') {
    const elements = node.namedChildren;
    if (elements.length < 2 || elements.some((e) => e.type === 'list_splat')) return null;
    return elements.map((element) => ({ element, loop: null }));
  }
  if (node.type === 'call') {
    // A workspace helper that returns a list of samples.
    const callee = sem.callee(node);
    return callee.symbol?.kind === 'function' ? returnedElements(sem, callee.symbol.fn) : null;
  }
  if (node.type !== 'identifier') return null;
  const out: { element: SyntaxNode; loop: Loop | null }[] = [];
  for (const b of sem.bindings(node)) {
    if (b.kind === 'assign' && b.value) {
      const v = unwrapParens(b.value);
      if (v.type === 'list' && v.namedChildren.length === 0) {
        const appended = appendedElements(sem, b);
        if (!appended) return null;
        out.push(...appended);
        continue;
      }
      if (v.type === 'call' && sem.callee(v).qualifiedName === 'builtins.list' && !sem.argument(v, 0)) {
        const appended = appendedElements(sem, b);
        if (!appended) return null;
        out.push(...appended);
        continue;
      }
      const inner = listElements(sem, v, depth + 1);
      if (!inner) return null;
      out.push(...inner);
      continue;
    }
    if (b.kind === 'augassign') continue;
    return null;
  }
  return out.length ? out : null;
}

/** Elements added to a list bound by `name = []`: `name.append(e)` and `name += [e]` in loops. */
function appendedElements(sem: Semantics, binding: Binding): { element: SyntaxNode; loop: Loop | null }[] | null {
  const out: { element: SyntaxNode; loop: Loop | null }[] = [];
  const statement = binding.node.closest('expression_statement') ?? binding.node;
  for (const use of identifierUses(sem, binding)) {
    const parent = use.parent;
    let element: SyntaxNode | null = null;
    if (parent?.type === 'attribute' && use.field === 'object' && parent.parent?.type === 'call' && parent.field === 'function') {
      const method = parent.child('attribute')?.text;
      if (method === 'append') element = sem.argument(parent.parent, 0);
      else continue;
    } else if (parent?.type === 'augmented_assignment' && use.field === 'left') {
      const right = parent.child('right');
      const r = right ? unwrapParens(right) : null;
      if (r?.type === 'list' && r.namedChildren.length === 1) element = r.namedChildren[0]!;
      else return null;
    } else continue;
    if (!element) continue;
    const loop = enclosingLoop(use, statement);
    if (!loop) return null;
    out.push({ element, loop });
  }
  return out.length ? out : null;
}

/** The innermost loop around a node that does not also contain `outside` (the list's creation). */
function enclosingLoop(node: SyntaxNode, outside: SyntaxNode | null): Loop | null {
  for (let n = node.parent; n; n = n.parent) {
    if (n.type === 'function_definition' || n.type === 'class_definition' || n.type === 'lambda') return null;
    if (outside && n.contains(outside)) return null;
    if (n.type === 'for_statement') {
      const body = n.child('body');
      const left = n.child('left');
      if (!body || !left || !body.contains(node)) continue;
      return { node: n, targets: targetIdentifiers(left), iterable: n.child('right'), body };
    }
    if (n.type === 'while_statement') {
      const body = n.child('body');
      if (!body || !body.contains(node)) continue;
      return { node: n, targets: [], iterable: null, body };
    }
  }
  return null;
}

function comprehensionLoop(comprehension: SyntaxNode, clause: SyntaxNode): Loop {
  return { node: comprehension, targets: targetIdentifiers(clause.child('left') ?? clause), iterable: clause.child('right'), body: comprehension };
}

function targetIdentifiers(target: SyntaxNode): SyntaxNode[] {
  if (target.type === 'identifier') return [target];
  return target.subtree().filter((n) => n.type === 'identifier');
}

/** Combines per-element samples into one sample set: every element must be a sample of one kind of prediction. */
function elementSamples(sem: Semantics, parts: { element: SyntaxNode; loop: Loop | null }[]): SampleSet | null {
  const sets: SampleSet[] = [];
  const listed = parts.every((p) => p.loop === null);
  if (listed) {
    // A literal list: the same model, or several models, called on the same input.
    const found = parts.map((p) => elementSample(sem, p.element, null, 0));
    if (found.some((f) => !f)) return null;
    const calls = found.map((f) => f!.call);
    const inputs = calls.map((c) => (modelInput(sem, c) ?? c).text);
    if (new Set(inputs).size !== 1) return null;
    const callees = new Set(calls.map((c) => c.child('function')?.text));
    const kinds = found.map((f) => f!.kind);
    const models = mergeRefs(calls.map((c) => modelRefOf(sem, c.child('function')!)));
    return { mode: callees.size === 1 ? 'mc' : 'listed', kind: combine(kinds.map((kind) => ({ kind }))).kind, model: calls[0]!.child('function')!, count: null, countValue: parts.length, models, foreignArrays: found.some((f) => f!.foreign) };
  }
  for (const p of parts) {
    if (!p.loop) return null;
    const found = elementSample(sem, p.element, p.loop, 0);
    if (!found) return null;
    const mode = found.member ? 'ensemble' : 'mc';
    const count = mode === 'mc' ? rangeCount(sem, p.loop.iterable) : null;
    const set =
      mode === 'ensemble'
        ? ensembleSample(sem, p.loop, found.kind)
        : { ...modelSample(sem, found.call, 'mc', count)!, kind: found.kind };
    if (!set) return null;
    set.foreignArrays = set.foreignArrays || found.foreign;
    sets.push(set);
  }
  const first = sets[0]!;
  return { ...first, kind: combine(sets.map((s) => ({ kind: s.kind }))).kind, models: mergeRefs(sets.map((s) => s.models)) };
}

/** One element traced back to the model call that makes it. */
interface ElementTrace {
  call: SyntaxNode;
  kind: OutputKind;
  /** For ensembles: the loop target that is the member being called. */
  member: SyntaxNode | null;
  foreign: boolean;
}

/**
 * Follows an element of a sample list back to a model call: through names bound inside the loop, tuple
 * unpacking, reshaping and device moves, a temperature, and normalisations (which set the element's kind).
 */
function elementSample(sem: Semantics, expr: SyntaxNode, loop: Loop | null, depth: number): ElementTrace | null {
  if (depth > MAX_DEPTH) return null;
  const node = unwrapParens(expr);
  if (node.type === 'identifier') {
    if (loop && loop.targets.some((t) => t.text === node.text)) return null;
    const bindings = sem.bindings(node);
    if (bindings.length !== 1) return null;
    const b = bindings[0]!;
    if (loop && !loop.body.contains(b.node)) return null;
    if (b.kind === 'assign' && b.value) return elementSample(sem, b.value, loop, depth + 1);
    if (b.unpack) {
      const inner = elementSample(sem, b.unpack.from, loop, depth + 1);
      if (!inner) return null;
      return { ...inner, kind: partKind(sem, inner, b.unpack.index) };
    }
    return null;
  }
  if (node.type === 'subscript') {
    const value = node.child('value');
    const index = node.child('subscript');
    if (!value || !index) return null;
    const inner = elementSample(sem, value, loop, depth + 1);
    if (!inner) return null;
    const i = sem.fold(index);
    if (typeof i === 'number' && node.childrenOf('subscript').length === 1) return { ...inner, kind: partKind(sem, inner, i) };
    // Slicing and new axes keep the values.
    return inner;
  }
  if (node.type === 'attribute' && node.child('attribute')?.text === 'data') {
    return elementSample(sem, node.child('object')!, loop, depth + 1);
  }
  if (node.type === 'binary_operator' && (node.child('operator')?.text === '/' || node.child('operator')?.text === '*')) {
    // A temperature or a constant scale keeps logits logits.
    const left = node.child('left');
    const right = node.child('right');
    if (!left || !right) return null;
    if (loop && dependsOnLoop(sem, right, loop)) return null;
    return elementSample(sem, left, loop, depth + 1);
  }
  if (node.type !== 'call') return null;
  const normaliser = normaliserOf(sem, node);
  if (normaliser) {
    const inner = elementSample(sem, normaliser.input, loop, depth + 1);
    return inner ? { ...inner, kind: normaliser.produces } : null;
  }
  const callee = sem.callee(node);
  if (callee.method && callee.receiver && PASS_METHODS.has(callee.method)) {
    const inner = elementSample(sem, callee.receiver, loop, depth + 1);
    return inner ? { ...inner, foreign: inner.foreign || callee.method === 'numpy' } : null;
  }
  if (callee.qualifiedName && PASS_FUNCTIONS.has(callee.qualifiedName)) {
    const first = sem.argument(node, 0);
    const inner = first ? elementSample(sem, first, loop, depth + 1) : null;
    return inner ? { ...inner, foreign: inner.foreign || !callee.qualifiedName.startsWith('torch') } : null;
  }
  if ((callee.method === 'log' && callee.receiver) || callee.qualifiedName === 'torch.log' || callee.qualifiedName === 'numpy.log') {
    const input = callee.method === 'log' ? callee.receiver! : sem.argument(node, 0);
    const inner = input ? elementSample(sem, input, loop, depth + 1) : null;
    return inner ? { ...inner, kind: inner.kind === 'probs' ? 'logprobs' : 'unknown' } : null;
  }
  if ((callee.method === 'exp' && callee.receiver) || callee.qualifiedName === 'torch.exp') {
    const input = callee.method === 'exp' ? callee.receiver! : sem.argument(node, 0);
    const inner = input ? elementSample(sem, input, loop, depth + 1) : null;
    return inner ? { ...inner, kind: inner.kind === 'logprobs' ? 'probs' : 'unknown' } : null;
  }
  return modelCallTrace(sem, node, loop);
}

/** Checks that a call calls one model on the same input in every pass of the loop, and says which kind of value it returns. */
function modelCallTrace(sem: Semantics, call: SyntaxNode, loop: Loop | null): ElementTrace | null {
  const fn = call.child('function');
  if (!fn) return null;
  const callee = sem.callee(call);
  // A library function (random draws, tensor factories) is not a model.
  if (callee.qualifiedName && (!callee.symbol || callee.symbol.kind === 'external')) {
    const last = callee.qualifiedName.split('.').pop() ?? '';
    if (/^[a-z_]/.test(last)) return null;
  }
  const positional = (call.child('arguments')?.namedChildren ?? []).filter((a) => a.type !== 'keyword_argument' && a.type !== 'comment');
  if (positional.length === 0) return null;
  let member: SyntaxNode | null = null;
  if (loop) {
    const root = unwrapParens(fn.type === 'attribute' ? (fn.child('object') ?? fn) : fn);
    const target = loop.targets.find((t) => root.type === 'identifier' && t.text === root.text && sem.bindings(root).some((b) => b.node === t));
    if (target) member = target;
    else if (dependsOnLoop(sem, fn, loop)) return null;
    for (const arg of positional) {
      const a = unwrapParens(arg);
      const t = loop.targets.find((x) => a.type === 'identifier' && x.text === a.text && sem.bindings(a).some((b) => b.node === x));
      if (t && !member && sem.callee(call).symbol?.kind === 'function') {
        member = t;
        continue;
      }
      if (dependsOnLoop(sem, arg, loop)) return null;
    }
  }
  const kind = member ? 'unknown' : modelCallKind(sem, call, 0).kind;
  const foreign = callee.method === 'predict' || (callee.method === 'apply' && !!callee.receiver);
  return { call, kind, member, foreign };
}

/** The kind of one part of a traced tuple value (`logits, kl = model(x)`). */
function partKind(sem: Semantics, trace: ElementTrace, index: number): OutputKind {
  if (trace.member) return 'unknown';
  const info = modelCallKind(sem, trace.call, 0);
  if (!info.parts) return 'unknown';
  return info.parts[index < 0 ? info.parts.length + index : index]?.kind ?? 'unknown';
}

/** True when an expression uses a loop target, directly or through names assigned inside the loop. */
function dependsOnLoop(sem: Semantics, expr: SyntaxNode, loop: Loop, depth = 0): boolean {
  if (depth > MAX_DEPTH) return false;
  for (const n of expr.subtree()) {
    if (n.type !== 'identifier' || isAttributeName(n)) continue;
    if (loop.targets.some((t) => t.text === n.text)) {
      if (sem.bindings(n).some((b) => loop.targets.includes(b.node))) return true;
    }
    for (const b of sem.bindings(n)) {
      if (!loop.body.contains(b.node) || loop.targets.includes(b.node)) continue;
      if (b.value && b.value !== expr && dependsOnLoop(sem, b.value, loop, depth + 1)) return true;
      if (b.unpack && dependsOnLoop(sem, b.unpack.from, loop, depth + 1)) return true;
    }
  }
  return false;
}

/** The sample set of an MC loop or a vectorised call: the model and the count. */
function modelSample(sem: Semantics, call: SyntaxNode, mode: SampleMode, count: SyntaxNode | null): SampleSet | null {
  const fn = call.child('function');
  if (!fn) return null;
  const kind = modelCallKind(sem, call, 0).kind;
  const callee = sem.callee(call);
  const modelExpr = callee.symbol?.kind === 'function' && !callee.boundMethod ? (modelArgument(sem, call) ?? fn) : fn;
  return { mode, kind, model: modelExpr, count, countValue: null, models: modelRefOf(sem, modelExpr), foreignArrays: false };
}

/** For helper calls like `predict_once(model, x)`: the argument that is a model, when one is. */
function modelArgument(sem: Semantics, call: SyntaxNode): SyntaxNode | null {
  for (const arg of call.child('arguments')?.namedChildren ?? []) {
    if (arg.type === 'keyword_argument') continue;
    const t = sem.typeOf(arg);
    if (t?.kind === 'instance' && sem.isModuleClass(t.cls)) return arg;
  }
  return sem.argument(call, 0);
}

/** The sample set of an ensemble loop: the members of the iterated collection. */
function ensembleSample(sem: Semantics, loop: Loop, elementKind: OutputKind): SampleSet | null {
  let iterable = loop.iterable ? unwrapParens(loop.iterable) : null;
  if (!iterable) return null;
  // `for i, m in enumerate(members)` iterates the members.
  if (iterable.type === 'call' && sem.callee(iterable).qualifiedName === 'builtins.enumerate') {
    const inner = sem.argument(iterable, 0);
    if (!inner) return null;
    iterable = unwrapParens(inner);
  }
  const members = memberExpressions(sem, iterable, 0);
  const kinds = members ? members.map((m) => moduleValueKind(sem, m, 0)) : [];
  // The element may be normalised after the call; otherwise its kind is the members' kind.
  const called = elementKind === 'unknown' ? combine(kinds).kind : elementKind;
  const refs = mergeRefs((members ?? []).map((m) => modelRefOf(sem, m)));
  const count = iterable.type === 'identifier' || iterable.type === 'attribute' ? iterable : null;
  return { mode: 'ensemble', kind: called, model: iterable, count, countValue: members && !count ? members.length : null, models: refs, foreignArrays: false };
}

/** The expressions that make the members of an ensemble collection (a list literal, `nn.ModuleList`, a comprehension, appends). */
function memberExpressions(sem: Semantics, expr: SyntaxNode, depth: number): SyntaxNode[] | null {
  if (depth > MAX_DEPTH) return null;
  const out: SyntaxNode[] = [];
  const node = unwrapParens(expr);
  if (node.type === 'identifier') {
    for (const b of sem.bindings(node)) {
      if (b.kind !== 'param') continue;
      for (const arg of callerArguments(sem, b)) out.push(...(memberExpressions(sem, arg, depth + 1) ?? []));
    }
  }
  for (const origin of valueOrigins(sem, expr)) {
    const o = unwrapParens(origin);
    if (o.type === 'list' || o.type === 'tuple') {
      if (o.namedChildren.length === 0 && o !== expr) {
        const binding = bindingOfValue(sem, o);
        const appended = binding ? appendedElements(sem, binding) : null;
        if (appended) out.push(...appended.map((a) => a.element));
        continue;
      }
      out.push(...o.namedChildren);
      continue;
    }
    if (o.type === 'list_comprehension' || o.type === 'generator_expression') {
      const body = o.child('body');
      if (body) out.push(body);
      continue;
    }
    if (o.type === 'call') {
      const q = sem.callee(o).qualifiedName;
      if (q === 'torch.nn.ModuleList' || q === 'builtins.list' || q === 'builtins.tuple' || q === 'torch.nn.modules.container.ModuleList') {
        const arg = sem.argument(o, 0);
        if (arg) {
          const inner = memberExpressions(sem, arg, depth + 1);
          if (inner) out.push(...inner);
        } else {
          // `members = nn.ModuleList()` filled by `members.append(...)` in a loop.
          const binding = bindingOfValue(sem, o);
          const appended = binding ? appendedElements(sem, binding) : null;
          if (appended) out.push(...appended.map((a) => a.element));
        }
        continue;
      }
      // A workspace factory that returns the collection of members.
      const callee = sem.callee(o);
      if (callee.symbol?.kind === 'function') {
        for (const r of callee.symbol.fn.returns) out.push(...(memberExpressions(sem, r, depth + 1) ?? []));
        continue;
      }
    }
  }
  return out.length ? out : null;
}

/** The binding whose value is this node, if it is the right-hand side of a simple assignment. */
function bindingOfValue(sem: Semantics, value: SyntaxNode): Binding | null {
  const parent = value.parent;
  if (parent?.type !== 'assignment' || value.field !== 'right') return null;
  const left = parent.child('left');
  if (!left || left.type !== 'identifier') return null;
  return sem.bindings(left).find((b) => b.node === left) ?? sem.moduleOf(left).bindingsIn(sem.moduleOf(left).scopeOf(left), left.text).find((b) => b.node === left) ?? null;
}

/** `range(T)` → T; anything else → null. */
function rangeCount(sem: Semantics, iterable: SyntaxNode | null): SyntaxNode | null {
  if (!iterable) return null;
  const it = unwrapParens(iterable);
  if (it.type !== 'call' || sem.callee(it).qualifiedName !== 'builtins.range') return null;
  const args = it.child('arguments')?.namedChildren ?? [];
  return args.length === 1 ? args[0]! : null;
}

// ---------------------------------------------------------------------------------------------------------------
// What a model returns.

/** The kind of value a model call returns, decided from the model's forward (resolved across files). */
function modelCallKind(sem: Semantics, call: SyntaxNode, depth: number): KindInfo {
  if (depth > KIND_DEPTH) return UNKNOWN;
  const callee = sem.callee(call);
  if (callee.symbol?.kind === 'function') return functionKind(sem, callee.symbol.fn, call, callee.boundMethod, depth + 1);
  if (callee.symbol?.kind === 'class') return UNKNOWN;
  const fn = call.child('function');
  if (!fn) return UNKNOWN;
  return moduleValueKind(sem, fn, depth + 1);
}

/** The kind a workspace function returns, with its parameters bound to the call's arguments where that matters. */
function functionKind(sem: Semantics, fn: FunctionInfo, call: SyntaxNode | null, bound: boolean, depth: number): KindInfo {
  if (depth > KIND_DEPTH) return UNKNOWN;
  const args = new Map<SyntaxNode, SyntaxNode>();
  if (call) {
    const offset = bound ? 1 : 0;
    fn.params.forEach((p, i) => {
      if (i < offset) return;
      const arg = sem.argument(call, i - offset, p.name);
      if (arg) args.set(p.node, arg);
    });
  }
  return combine(fn.returns.map((r) => exprKind(sem, r, args, depth + 1)));
}

/** The kind of value calling a module value gives (`self.head`, `model`, `nn.Dense(10)`). */
function moduleValueKind(sem: Semantics, expr: SyntaxNode, depth: number, args: Map<SyntaxNode, SyntaxNode> = new Map()): KindInfo {
  if (depth > KIND_DEPTH) return UNKNOWN;
  const node = unwrapParens(expr);
  const type = sem.typeOf(node);
  if (type?.kind === 'instance') return classKind(sem, type.cls, depth + 1);
  if (node.type === 'call') return constructorKind(sem, node, depth + 1);
  const kinds: KindInfo[] = [];
  for (const origin of sem.origins(node)) {
    if (origin.parameter) {
      const arg = args.get(origin.parameter.node);
      if (arg) kinds.push(moduleValueKind(sem, arg, depth + 1));
      else {
        // An unannotated parameter: what the callers pass in (resolved across the workspace).
        const passed = callerArguments(sem, origin.parameter);
        if (passed.length) kinds.push(combine(passed.map((a) => moduleValueKind(sem, a, depth + 2))));
        else {
          // No call binds it: the model is one of the module classes its file defines or imports, when it has any.
          const candidates = unboundModelCandidates(sem, origin.parameter);
          kinds.push(candidates.length ? combine(candidates.map((c) => classKind(sem, c, depth + 2))) : UNKNOWN);
        }
      }
      continue;
    }
    const o = unwrapParens(origin.node);
    if (o.type === 'call') kinds.push(constructorKind(sem, o, depth + 1));
    else kinds.push(UNKNOWN);
  }
  return combine(kinds);
}

/**
 * The model an unannotated parameter that no call in the workspace binds stands for: the one neural-network module
 * class its file defines or imports from the workspace (a module of helpers works on the model it knows), or none
 * when the file has several or none. Memoised per file.
 */
function unboundModelCandidates(sem: Semantics, param: Binding): ClassInfo[] {
  if (param.kind !== 'param' || param.annotation) return [];
  const module = sem.moduleOf(param.node);
  const memo = sem.workspace.memoTable<SyntaxNode, ClassInfo[]>('logit-space-average:file-models');
  const cached = memo.get(module.syntax.root);
  if (cached) return cached;
  const found: ClassInfo[] = [];
  const fromPath = (sem.workspace.analysisOfNode(param.node) ?? sem.analysis).file.absPath;
  for (const bindings of module.moduleScope.bindings.values()) {
    for (const b of bindings) {
      let cls: ClassInfo | null = null;
      if (b.kind === 'class' && b.definition) cls = module.classByNode.get(b.definition.id) ?? null;
      else if (b.kind === 'import' && b.qualifiedName) {
        const symbol = sem.symbolOfQualifiedName(b.qualifiedName, fromPath);
        if (symbol?.kind === 'class') cls = symbol.cls;
      }
      if (cls && !found.includes(cls) && sem.isModuleClass(cls)) found.push(cls);
    }
  }
  // Several candidates: which one a helper receives is not known, so nothing is assumed.
  const out = found.length === 1 ? found : [];
  memo.set(module.syntax.root, out);
  return out;
}

/** The arguments the workspace's calls pass for a function parameter. */
function callerArguments(sem: Semantics, param: Binding): SyntaxNode[] {
  if (param.kind !== 'param' || param.paramIndex === undefined || !param.definition) return [];
  const fn = sem.moduleOf(param.node).functionByNode.get(param.definition.id);
  if (!fn) return [];
  const out: SyntaxNode[] = [];
  for (const call of callersOf(sem, fn)) {
    const offset = sem.callee(call).boundMethod ? 1 : 0;
    const arg = sem.argument(call, param.paramIndex - offset, param.name);
    if (arg) out.push(arg);
  }
  return out;
}

/** The kind of output of a module made by a constructor call (a layer, a Sequential, a workspace class, a factory). */
function constructorKind(sem: Semantics, call: SyntaxNode, depth: number): KindInfo {
  if (depth > KIND_DEPTH) return UNKNOWN;
  const callee = sem.callee(call);
  if (callee.symbol?.kind === 'class') return classKind(sem, callee.symbol.cls, depth + 1);
  if (callee.symbol?.kind === 'function') {
    // A factory: what the returned module returns.
    return combine(callee.symbol.fn.returns.map((r) => moduleValueKind(sem, r, depth + 1)));
  }
  const q = callee.qualifiedName;
  if (!q) return UNKNOWN;
  if (q === 'copy.deepcopy') {
    const arg = sem.argument(call, 0);
    return arg ? moduleValueKind(sem, arg, depth + 1) : UNKNOWN;
  }
  if (RAW_MODULES.has(q)) return { kind: kerasActivationKind(sem, call) ?? 'raw' };
  if (q in NORMALISING_MODULES) return { kind: NORMALISING_MODULES[q]! };
  if (ACTIVATION_LAYERS.has(q)) return { kind: kerasActivationKind(sem, call, 0) ?? 'unknown' };
  if (SEQUENTIAL_MODULES.has(q)) {
    let layers = (call.child('arguments')?.namedChildren ?? []).filter((a) => a.type !== 'keyword_argument' && a.type !== 'comment');
    if (!q.startsWith('torch') && layers.length === 1 && unwrapParens(layers[0]!).type === 'list') layers = unwrapParens(layers[0]!).namedChildren;
    for (let i = layers.length - 1; i >= 0; i--) {
      const layer = unwrapParens(layers[i]!);
      if (layer.type === 'list_splat') return UNKNOWN;
      const layerCall = layer.type === 'call' ? layer : null;
      const lq = layerCall ? sem.callee(layerCall).qualifiedName : null;
      if (lq && TRANSPARENT_MODULES.has(lq)) continue;
      if (lq && /\.Input$|\.InputLayer$/.test(lq)) continue;
      return moduleValueKind(sem, layer, depth + 1);
    }
    return UNKNOWN;
  }
  return UNKNOWN;
}

/** Keras layers: `activation="softmax"` (probabilities), none or "linear" (raw), anything else (unknown). */
function kerasActivationKind(sem: Semantics, call: SyntaxNode, position = 99): OutputKind | null {
  const q = sem.callee(call).qualifiedName ?? '';
  if (q.startsWith('torch') || q.startsWith('flax')) return null;
  const activation = sem.argument(call, position, 'activation');
  if (!activation) return position === 0 ? 'unknown' : null;
  const value = sem.fold(activation);
  if (value === 'softmax' || value === 'sigmoid') return 'probs';
  if (value === 'log_softmax') return 'logprobs';
  if (value === 'linear' || unwrapParens(activation).type === 'none') return 'raw';
  const aq = sem.qualifiedName(activation) ?? '';
  if (/\.(softmax|sigmoid)$/.test(aq)) return 'probs';
  return 'unknown';
}

/** The kind of a workspace module class's output: what its `forward` (or `__call__` / `call`) returns. */
function classKind(sem: Semantics, cls: ClassInfo, depth: number): KindInfo {
  const memo = sem.workspace.memoTable<ClassInfo, KindInfo>('logit-space-average:class-kind');
  const cached = memo.get(cls);
  if (cached) return cached;
  memo.set(cls, UNKNOWN);
  let result = UNKNOWN;
  if (depth <= KIND_DEPTH) {
    const method = sem.findMethod(cls, 'forward') ?? sem.findMethod(cls, '__call__') ?? sem.findMethod(cls, 'call');
    if (method) result = functionKind(sem, method, null, true, depth + 1);
  }
  memo.set(cls, result);
  return result;
}

/** The kind of an expression inside a forward (or helper): normalisations, linear maps, layer calls, names. */
function exprKind(sem: Semantics, expr: SyntaxNode, args: Map<SyntaxNode, SyntaxNode>, depth: number): KindInfo {
  if (depth > KIND_DEPTH) return UNKNOWN;
  const node = unwrapParens(expr);
  switch (node.type) {
    case 'tuple':
    case 'expression_list':
      return { kind: 'unknown', parts: node.namedChildren.map((c) => exprKind(sem, c, args, depth + 1)) };
    case 'conditional_expression':
      return combine(node.namedChildren.slice(0, 1).concat(node.namedChildren.slice(2)).map((c) => exprKind(sem, c, args, depth + 1)));
    case 'binary_operator': {
      const op = node.child('operator')?.text;
      const left = node.child('left');
      const right = node.child('right');
      if (!left || !right) return UNKNOWN;
      if (op === '@') return { kind: 'raw' };
      const l = exprKind(sem, left, args, depth + 1);
      if (op === '/') return l.kind === 'raw' ? l : UNKNOWN;
      if (op === '*') return l.kind === 'raw' || exprKind(sem, right, args, depth + 1).kind === 'raw' ? { kind: 'raw' } : UNKNOWN;
      if (op === '+' || op === '-') {
        const r = exprKind(sem, right, args, depth + 1);
        if (l.kind === 'raw' || r.kind === 'raw') return { kind: 'raw' };
      }
      return UNKNOWN;
    }
    case 'subscript': {
      const value = node.child('value');
      return value ? { kind: exprKind(sem, value, args, depth + 1).kind } : UNKNOWN;
    }
    case 'identifier':
    case 'attribute': {
      const kinds: KindInfo[] = [];
      for (const origin of sem.origins(node)) {
        if (origin.parameter) {
          const arg = args.get(origin.parameter.node);
          kinds.push(arg ? exprKind(sem, arg, new Map(), depth + 1) : UNKNOWN);
          continue;
        }
        const o = unwrapParens(origin.node);
        if (o === node) {
          kinds.push(unpackKind(sem, node, args, depth));
          continue;
        }
        kinds.push(exprKind(sem, o, args, depth + 1));
      }
      return combine(kinds);
    }
    case 'call':
      return callKind(sem, node, args, depth + 1);
    default:
      return UNKNOWN;
  }
}

/** `logits, kl = self.body(x)`: the kind of one unpacked part. */
function unpackKind(sem: Semantics, node: SyntaxNode, args: Map<SyntaxNode, SyntaxNode>, depth: number): KindInfo {
  if (node.type !== 'identifier') return UNKNOWN;
  const b = sem.bindings(node).find((x) => x.unpack);
  if (!b?.unpack) return UNKNOWN;
  const whole = exprKind(sem, b.unpack.from, args, depth + 1);
  return whole.parts?.[b.unpack.index] ?? UNKNOWN;
}

/** The kind of a call's result inside a forward. */
function callKind(sem: Semantics, call: SyntaxNode, args: Map<SyntaxNode, SyntaxNode>, depth: number): KindInfo {
  const normaliser = normaliserOf(sem, call);
  if (normaliser) return { kind: normaliser.produces };
  const callee = sem.callee(call);
  const q = callee.qualifiedName;
  if (q && RAW_FUNCTIONS.has(q)) return { kind: 'raw' };
  if (callee.method && callee.receiver && PASS_METHODS.has(callee.method)) return { kind: exprKind(sem, callee.receiver, args, depth + 1).kind };
  if (q && PASS_FUNCTIONS.has(q)) {
    const first = sem.argument(call, 0);
    return first ? { kind: exprKind(sem, first, args, depth + 1).kind } : UNKNOWN;
  }
  if ((callee.method === 'log' && callee.receiver) || q === 'torch.log') {
    const input = callee.method === 'log' ? callee.receiver! : sem.argument(call, 0);
    return input && exprKind(sem, input, args, depth + 1).kind === 'probs' ? { kind: 'logprobs' } : UNKNOWN;
  }
  if ((callee.method === 'exp' && callee.receiver) || q === 'torch.exp') {
    const input = callee.method === 'exp' ? callee.receiver! : sem.argument(call, 0);
    return input && exprKind(sem, input, args, depth + 1).kind === 'logprobs' ? { kind: 'probs' } : UNKNOWN;
  }
  if (callee.symbol?.kind === 'function') return functionKind(sem, callee.symbol.fn, call, callee.boundMethod, depth + 1);
  if (callee.symbol?.kind === 'class') return UNKNOWN;
  if (q && (!callee.symbol || callee.symbol.kind === 'external') && /^[a-z_]/.test(q.split('.').pop() ?? '')) return UNKNOWN;
  const fn = call.child('function');
  return fn ? moduleValueKind(sem, fn, depth + 1, args) : UNKNOWN;
}

/** Combines the kinds of several paths: any probabilities win (benefit of the doubt), then log-probabilities, then raw. */
function combine(kinds: KindInfo[]): KindInfo {
  if (kinds.length === 0) return UNKNOWN;
  if (kinds.length === 1) return kinds[0]!;
  for (const k of ['probs', 'logprobs', 'raw'] as const) if (kinds.some((x) => x.kind === k)) return { kind: k };
  return UNKNOWN;
}

/** A normalising call (`F.softmax(x, -1)`, `x.log_softmax(-1)`, `torch.sigmoid(x)`): its input and what it makes. */
function normaliserOf(sem: Semantics, call: SyntaxNode): { input: SyntaxNode; produces: 'probs' | 'logprobs'; family: 'softmax' | 'sigmoid'; dim: SyntaxNode | null; method: boolean } | null {
  if (call.type !== 'call') return null;
  const callee = sem.callee(call);
  if (callee.qualifiedName && callee.qualifiedName in NORMALISERS) {
    const info = NORMALISERS[callee.qualifiedName]!;
    const input = sem.argument(call, 0, 'input') ?? sem.argument(call, 0, 'x') ?? sem.argument(call, 0, 'logits');
    if (!input) return null;
    const dim = info.family === 'softmax' ? (sem.argument(call, 1, 'dim') ?? sem.argument(call, 1, 'axis')) : null;
    return { input, ...info, dim, method: false };
  }
  if (callee.method && callee.receiver && callee.method in NORMALISER_METHODS && !callee.symbol && sem.typeOf(callee.receiver)?.kind !== 'instance') {
    const info = NORMALISER_METHODS[callee.method]!;
    return { input: callee.receiver, ...info, dim: info.family === 'softmax' ? sem.argument(call, 0, 'dim') : null, method: true };
  }
  // A normalising layer module (`self.softmax = nn.Softmax(-1)`; `self.softmax(h)`).
  const fn = call.child('function');
  if (fn && (fn.type === 'identifier' || fn.type === 'attribute') && !callee.qualifiedName) {
    const type = sem.typeOf(fn);
    if (type?.kind === 'external' && type.qualifiedName in NORMALISING_MODULES) {
      const input = sem.argument(call, 0);
      if (!input) return null;
      return { input, produces: NORMALISING_MODULES[type.qualifiedName]!, family: /Sigmoid/.test(type.qualifiedName) ? 'sigmoid' : 'softmax', dim: null, method: false };
    }
  }
  return null;
}

// ---------------------------------------------------------------------------------------------------------------
// How the average is used.

/**
 * Uses of a value as a predictive distribution, following assignments, tensor methods that keep the values,
 * arithmetic (a temperature), calls of workspace functions into their parameters, and returns into the callers.
 */
function predictiveUses(sem: Semantics, expr: SyntaxNode, depth: number, seen: Set<SyntaxNode>, direct = true): PredictiveUse[] {
  if (depth > MAX_DEPTH || seen.has(expr)) return [];
  seen.add(expr);
  let node = expr;
  while (node.parent?.type === 'parenthesized_expression') node = node.parent;
  const parent = node.parent;
  if (!parent) return [];
  const out: PredictiveUse[] = [];
  // Argument of a call.
  const argList = parent.type === 'argument_list' ? parent : parent.type === 'keyword_argument' && parent.parent?.type === 'argument_list' ? parent.parent : null;
  if (argList && argList.parent?.type === 'call') {
    const call = argList.parent;
    const keyword = parent.type === 'keyword_argument' ? parent.child('name')?.text ?? null : null;
    const position = keyword ? -1 : argList.namedChildren.filter((a) => a.type !== 'keyword_argument').indexOf(node);
    out.push(...argumentUses(sem, call, node, position, keyword, depth, seen, direct));
    return out;
  }
  if (parent.type === 'generator_expression' && parent.field === 'arguments') return out;
  // Receiver of a method call.
  if (parent.type === 'attribute' && node.field === 'object') {
    const method = parent.child('attribute')?.text ?? '';
    const call = parent.parent?.type === 'call' && parent.field === 'function' ? parent.parent : null;
    if (!call) {
      if (method === 'data' || method === 'T') out.push(...predictiveUses(sem, parent, depth + 1, seen, false));
      return out;
    }
    if (method in NORMALISER_METHODS) {
      const n = NORMALISER_METHODS[method]!;
      out.push({ kind: n.produces === 'logprobs' ? 'log_softmax' : n.family, node: call, label: `passed to ${method}`, direct, dim: n.family === 'softmax' ? sem.argument(call, 0, 'dim') : null });
    } else if (ARGMAX_METHODS.has(method) && (method === 'argmax' || sem.argument(call, 0, 'dim') || sem.argument(call, 0, 'axis'))) out.push({ kind: 'argmax', node: call, label: method === 'argmax' ? "argmax'd as the prediction" : `reduced with \`.${method}()\` as the prediction`, direct, dim: sem.argument(call, 0, 'dim') });
    else if (method === 'exp') out.push({ kind: 'exp', node: call, label: 'exponentiated as the predictive probability', direct });
    else if (method === 'gather') out.push({ kind: 'index', node: call, label: 'indexed at the labels as the predictive log-probability', direct });
    else if (PASS_METHODS.has(method) || method === 'div' || method === 'mul' || method === 'div_') out.push(...predictiveUses(sem, call, depth + 1, seen, false));
    return out;
  }
  if (parent.type === 'assignment' && node.field === 'right') {
    const left = parent.child('left');
    if (left?.type === 'identifier') for (const b of bindingsAt(sem, left)) out.push(...bindingUses(sem, b, null, depth + 1, seen));
    return out;
  }
  if ((parent.type === 'expression_list' || parent.type === 'tuple') && parent.parent) {
    const index = parent.namedChildren.indexOf(node);
    const holder = parent.parent;
    if (holder.type === 'assignment' && parent.field === 'right') {
      const left = holder.child('left');
      const target = left && (left.type === 'pattern_list' || left.type === 'tuple_pattern') ? left.namedChildren[index] : null;
      if (target?.type === 'identifier') for (const b of bindingsAt(sem, target)) out.push(...bindingUses(sem, b, null, depth + 1, seen));
      return out;
    }
    if (holder.type === 'return_statement') out.push(...returnUses(sem, holder, index, depth, seen));
    return out;
  }
  if (parent.type === 'return_statement') {
    out.push(...returnUses(sem, parent, -1, depth, seen));
    return out;
  }
  if (parent.type === 'binary_operator') {
    const op = parent.child('operator')?.text;
    if (op === '/' || op === '*' || op === '+' || op === '-') out.push(...predictiveUses(sem, parent, depth + 1, seen, false));
    return out;
  }
  if (parent.type === 'unary_operator') {
    out.push(...predictiveUses(sem, parent, depth + 1, seen, false));
    return out;
  }
  if (parent.type === 'comparison_operator') {
    const other = parent.namedChildren.find((c) => c !== node);
    if (other && sem.fold(other) === 0) out.push({ kind: 'threshold', node: parent, label: 'thresholded at 0 as the prediction', direct });
    return out;
  }
  if (parent.type === 'subscript' && node.field === 'value') {
    const index = parent.childrenOf('subscript');
    const labelled = index.some((i) => i.type !== 'slice' && i.type !== 'ellipsis' && i.type !== 'none' && sem.fold(i) === null);
    if (labelled) out.push({ kind: 'index', node: parent, label: 'indexed at the labels as the predictive log-probability', direct });
    out.push(...predictiveUses(sem, parent, depth + 1, seen, false));
    return out;
  }
  if (parent.type === 'conditional_expression') out.push(...predictiveUses(sem, parent, depth + 1, seen, false));
  return out;
}

/** Uses of the value as an argument of a call: normalisers, argmax, losses, metrics, distributions, workspace functions. */
function argumentUses(sem: Semantics, call: SyntaxNode, node: SyntaxNode, position: number, keyword: string | null, depth: number, seen: Set<SyntaxNode>, direct: boolean): PredictiveUse[] {
  const callee = sem.callee(call);
  const q = callee.qualifiedName;
  const isInput = position === 0 || keyword === 'input' || keyword === 'x' || keyword === 'logits';
  const short = (q ?? callee.method ?? 'call').split('.').pop()!;
  const normaliser = normaliserOf(sem, call);
  if (normaliser && normaliser.input === node) {
    const kind = normaliser.produces === 'logprobs' ? (normaliser.family === 'softmax' ? 'log_softmax' : 'sigmoid') : normaliser.family;
    return [{ kind, node: call, label: `passed to ${short}`, direct, dim: normaliser.dim }];
  }
  if (q && ARGMAX_FUNCTIONS.has(q) && isInput && (/argmax$/.test(q) || sem.argument(call, 1, 'dim') || sem.argument(call, 1, 'axis'))) return [{ kind: 'argmax', node: call, label: short === 'argmax' ? "argmax'd as the prediction" : `reduced with \`${short}\` as the prediction`, direct, dim: sem.argument(call, 1, 'dim') ?? sem.argument(call, 1, 'axis') }];
  if (q && q in LOSS_FUNCTIONS && (isInput || (q.startsWith('tensorflow') && keyword === 'logits'))) {
    const family = LOSS_FUNCTIONS[q]!;
    return [{ kind: family === 'softmax' ? 'loss-softmax' : family === 'sigmoid' ? 'loss-sigmoid' : 'loss-logprob', node: call, label: `fed to \`${short}\``, direct }];
  }
  if (q && ((REGRESSION_LOSSES.has(q) && isInput) || (LOCATION_DISTRIBUTIONS.has(q) && (position === 0 || keyword === 'loc')))) return [{ kind: 'regression', node: call, label: `used as a predicted value in \`${short}\``, direct }];
  if (q && q in LOGIT_DISTRIBUTIONS && keyword === 'logits') return [{ kind: 'distribution', node: call, label: `used as the logits of a \`${short}\` distribution`, direct }];
  if (q && CLASSIFICATION_METRIC.test(q)) return [{ kind: 'metric', node: call, label: `passed to the metric \`${short}\``, direct }];
  if (q === 'torch.exp' && isInput) return [{ kind: 'exp', node: call, label: 'exponentiated as the predictive probability', direct }];
  if (q === 'torch.gather' && isInput) return [{ kind: 'index', node: call, label: 'indexed at the labels as the predictive log-probability', direct }];
  if (q && PASS_FUNCTIONS.has(q) && isInput) return predictiveUses(sem, call, depth + 1, seen, false);
  // A loss or metric module instance (`criterion = nn.CrossEntropyLoss()`; `criterion(mean, y)`).
  const fn = call.child('function');
  if (fn && !q && isInput) {
    const type = sem.typeOf(fn);
    if (type?.kind === 'external') {
      const family = LOSS_MODULES[type.qualifiedName];
      if (family) return [{ kind: family === 'softmax' ? 'loss-softmax' : family === 'sigmoid' ? 'loss-sigmoid' : 'loss-logprob', node: call, label: `fed to \`${type.qualifiedName.split('.').pop()}\``, direct }];
      if (CLASSIFICATION_METRIC.test(type.qualifiedName)) return [{ kind: 'metric', node: call, label: `passed to the metric \`${type.qualifiedName.split('.').pop()}\``, direct }];
    }
  }
  // A workspace function: how it uses the parameter.
  if (callee.symbol?.kind === 'function') {
    const target = callee.symbol.fn;
    const offset = callee.boundMethod ? 1 : 0;
    const param = keyword ? target.params.find((p) => p.name === keyword) : target.params[position + offset];
    if (!param) return [];
    return bindingUses(sem, param, null, depth + 1, seen).map((u) => ({ ...u, direct: false, label: u.label.includes(' in `') ? u.label : `${u.label} in \`${target.name}\`` }));
  }
  return [];
}

/** Uses of a returned value: "returned from a function", and whatever its callers do with it. */
function returnUses(sem: Semantics, ret: SyntaxNode, index: number, depth: number, seen: Set<SyntaxNode>): PredictiveUse[] {
  const fn = sem.moduleOf(ret).enclosingFunction(ret);
  if (!fn) return [];
  const out: PredictiveUse[] = [{ kind: 'returned', node: ret, label: `returned from \`${fn.name}\` as the prediction`, direct: false }];
  if (depth >= MAX_DEPTH - 2) return out;
  for (const call of callersOf(sem, fn)) {
    if (index < 0) {
      out.push(...predictiveUses(sem, call, depth + 2, seen, false));
      continue;
    }
    // `mean, spread = predict(...)`: follow the matching target.
    let holder = call;
    while (holder.parent?.type === 'parenthesized_expression') holder = holder.parent;
    const assignment = holder.parent?.type === 'assignment' && holder.field === 'right' ? holder.parent : null;
    const left = assignment?.child('left');
    if (left && (left.type === 'pattern_list' || left.type === 'tuple_pattern')) {
      const target = left.namedChildren[index];
      if (target?.type === 'identifier') for (const b of bindingsAt(sem, target)) out.push(...bindingUses(sem, b, null, depth + 2, seen));
    }
  }
  return out;
}

/** Calls of a workspace function from files that can see it. */
function callersOf(sem: Semantics, fn: FunctionInfo): SyntaxNode[] {
  const memo = sem.workspace.memoTable<FunctionInfo, SyntaxNode[]>('logit-space-average:callers');
  const cached = memo.get(fn);
  if (cached) return cached;
  const out: SyntaxNode[] = [];
  memo.set(fn, out);
  const owner = sem.workspace.analysisOfNode(fn.node) ?? (fn.node.file === sem.analysis.syntax ? sem.analysis : null);
  if (!owner) return out;
  for (const file of [...sem.workspace.dependentsOf(owner.file.absPath)].sort()) {
    for (const node of sem.callsNamed(file, fn.name)) {
      const callee = sem.callee(node);
      if (callee.symbol?.kind === 'function' && callee.symbol.fn === fn) out.push(node);
    }
  }
  return out;
}

/** Bindings made at an assignment target. */
function bindingsAt(sem: Semantics, target: SyntaxNode): Binding[] {
  const module = sem.moduleOf(target);
  return module.bindingsIn(module.scopeOf(target), target.text).filter((b) => b.node === target);
}

/** Uses of a binding as a predictive distribution (every later read of the name). */
function bindingUses(sem: Semantics, binding: Binding, after: SyntaxNode | null, depth = 0, seen: Set<SyntaxNode> = new Set()): PredictiveUse[] {
  const out: PredictiveUse[] = [];
  for (const use of identifierUses(sem, binding)) {
    if (after && after.contains(use)) continue;
    out.push(...predictiveUses(sem, use, depth + 1, seen, true));
  }
  return out;
}

/** Identifiers (reads) that resolve to a binding. */
function identifierUses(sem: Semantics, binding: Binding): SyntaxNode[] {
  const scopeNode = binding.scope.node;
  const file = scopeNode.file;
  const out: SyntaxNode[] = [];
  for (let i = scopeNode.id; i < file.nodes.length; i++) {
    const n = file.nodes[i]!;
    if (n.start >= scopeNode.end && i > scopeNode.id) break;
    if (n.type !== 'identifier' || n.text !== binding.name || n === binding.node || isAttributeName(n)) continue;
    if (n.parent?.type === 'keyword_argument' && n.field === 'name') continue;
    if (sem.bindings(n).includes(binding)) out.push(n);
  }
  return out;
}

/** True for the attribute-name part of `a.b` (not a name reference). */
function isAttributeName(n: SyntaxNode): boolean {
  return n.parent?.type === 'attribute' && n.field === 'attribute';
}

// ---------------------------------------------------------------------------------------------------------------
// Deciding.

/** The use that makes the average a predictive distribution, or null when the contract says to stay quiet. */
function decide(sem: Semantics, samples: SampleSet, uses: PredictiveUse[]): PredictiveUse | null {
  if (uses.length === 0) return null;
  if (samples.kind === 'logprobs') return uses.find((u) => u.kind !== 'threshold') ?? null;
  // Raw or unknown outputs: a normalisation, a logit distribution or a logit loss downstream says these are logits.
  const normalising = uses.find((u) => u.kind === 'softmax' || u.kind === 'sigmoid' || u.kind === 'log_softmax' || u.kind === 'distribution' || u.kind === 'loss-softmax' || u.kind === 'loss-sigmoid');
  if (normalising) return normalising;
  // Otherwise the model has to be a classifier: its forward ends in a linear layer and nothing treats its outputs as
  // predicted values, or its outputs are normalised or fed to a classification loss elsewhere.
  const classifier = (): boolean => {
    if (uses.some((u) => u.kind === 'regression')) return false;
    const evidence = modelEvidence(sem, samples.models);
    if (evidence.classification) return true;
    return samples.kind === 'raw' && !evidence.regression;
  };
  const classifying = uses.find((u) => u.kind === 'argmax' || u.kind === 'metric' || u.kind === 'threshold');
  if (classifying && classifier()) return classifying;
  const returned = uses.find((u) => u.kind === 'returned');
  if (returned && modelEvidence(sem, samples.models).classification) return returned;
  return null;
}

/** How the model's outputs are used elsewhere in the workspace: normalised or fed to a classification loss, or fed to a regression loss. */
function modelEvidence(sem: Semantics, ref: ModelRef): { classification: boolean; regression: boolean } {
  const out = { classification: false, regression: false };
  if (ref.classes.size === 0 && ref.bindings.size === 0) return out;
  const files = new Set<string>([sem.analysis.file.absPath]);
  for (const cls of ref.classes) {
    const owner = sem.workspace.analysisOfNode(cls.node);
    if (owner) for (const f of sem.workspace.dependentsOf(owner.file.absPath)) files.add(f);
  }
  for (const file of [...files].sort()) {
    const analysis = file === sem.analysis.file.absPath ? sem.analysis : sem.workspace.analysis(file);
    if (!analysis) continue;
    for (const consumer of outputConsumers(sem, analysis.syntax.nodes)) {
      if (out[consumer.kind]) continue;
      if (reachesModel(sem, consumer.input, ref, 0)) out[consumer.kind] = true;
    }
    if (out.classification) break;
  }
  return out;
}

/** Inputs of calls that treat a value as logits (normalisations, logit losses) or as a predicted value (regression losses, a Normal's loc), memoised per file. */
function outputConsumers(sem: Semantics, nodes: SyntaxNode[]): { input: SyntaxNode; kind: 'classification' | 'regression' }[] {
  const first = nodes[0];
  if (!first) return [];
  const memo = sem.workspace.memoTable<SyntaxNode, { input: SyntaxNode; kind: 'classification' | 'regression' }[]>('logit-space-average:consumers');
  const cached = memo.get(first);
  if (cached) return cached;
  const out: { input: SyntaxNode; kind: 'classification' | 'regression' }[] = [];
  const add = (input: SyntaxNode | null, kind: 'classification' | 'regression') => {
    if (input) out.push({ input, kind });
  };
  for (const node of nodes) {
    if (node.type !== 'call') continue;
    const normaliser = normaliserOf(sem, node);
    if (normaliser) {
      add(normaliser.input, 'classification');
      continue;
    }
    const callee = sem.callee(node);
    const q = callee.qualifiedName;
    if (q && q in LOSS_FUNCTIONS) add(q.startsWith('tensorflow') ? sem.argument(node, 99, 'logits') : sem.argument(node, 0, 'input'), 'classification');
    else if (q && REGRESSION_LOSSES.has(q)) add(sem.argument(node, 0, 'input'), 'regression');
    else if (q && LOCATION_DISTRIBUTIONS.has(q)) add(sem.argument(node, 0, 'loc'), 'regression');
    else if (node.child('function') && !q) {
      const type = sem.typeOf(node.child('function')!);
      if (type?.kind === 'external' && type.qualifiedName in LOSS_MODULES) add(sem.argument(node, 0, 'input'), 'classification');
      else if (type?.kind === 'external' && REGRESSION_LOSS_MODULES.has(type.qualifiedName)) add(sem.argument(node, 0, 'input'), 'regression');
    }
  }
  memo.set(first, out);
  return out;
}

/** True when an expression's value comes from a call of the model (through names, unpacking and reshaping). */
function reachesModel(sem: Semantics, expr: SyntaxNode, ref: ModelRef, depth: number): boolean {
  if (depth > MAX_DEPTH) return false;
  const node = unwrapParens(expr);
  if (node.type === 'call') {
    const callee = sem.callee(node);
    if (callee.method && callee.receiver && (PASS_METHODS.has(callee.method) || callee.method === 'mean' || callee.method === 'sum')) return reachesModel(sem, callee.receiver, ref, depth + 1);
    const q = callee.qualifiedName;
    if (q && (STACK_FUNCTIONS.has(q) || CAT_FUNCTIONS.has(q) || MEAN_FUNCTIONS.has(q) || SUM_FUNCTIONS.has(q) || q === 'builtins.sum')) {
      const first = q === 'builtins.sum' && node.child('arguments')?.type === 'generator_expression' ? node.child('arguments') : sem.argument(node, 0);
      return first ? reachesModel(sem, first, ref, depth + 1) : false;
    }
    const fn = node.child('function');
    if (!fn) return false;
    return refMatches(sem, modelRefOf(sem, fn), ref);
  }
  if (node.type === 'list_comprehension' || node.type === 'generator_expression') {
    const body = node.child('body');
    return body ? reachesModel(sem, body, ref, depth + 1) : false;
  }
  if (node.type === 'list' || node.type === 'tuple') return node.namedChildren.some((c) => reachesModel(sem, c, ref, depth + 1));
  if (node.type === 'subscript' || (node.type === 'binary_operator' && ['/', '*'].includes(node.child('operator')?.text ?? ''))) {
    const inner = node.child('value') ?? node.child('left');
    return inner ? reachesModel(sem, inner, ref, depth + 1) : false;
  }
  if (node.type === 'identifier') {
    for (const b of sem.bindings(node)) {
      if ((b.kind === 'assign' || b.kind === 'walrus') && b.value && reachesModel(sem, b.value, ref, depth + 1)) return true;
      if (b.unpack && reachesModel(sem, b.unpack.from, ref, depth + 1)) return true;
    }
  }
  return false;
}

/** What identifies the model an expression calls: its workspace class(es) and, for names, their bindings. */
function modelRefOf(sem: Semantics, expr: SyntaxNode, depth = 0): ModelRef {
  const ref: ModelRef = { classes: new Set(), bindings: new Set() };
  if (depth > MAX_DEPTH) return ref;
  const node = unwrapParens(expr);
  const root = node.type === 'attribute' && ['forward', 'predict', 'apply', 'predict_logits'].includes(node.child('attribute')?.text ?? '') ? unwrapParens(node.child('object')!) : node;
  const type = sem.typeOf(root);
  if (type?.kind === 'instance') ref.classes.add(type.cls);
  else if (root.type === 'call') {
    const callee = sem.callee(root);
    if (callee.symbol?.kind === 'class') ref.classes.add(callee.symbol.cls);
    if (callee.qualifiedName === 'copy.deepcopy' && sem.argument(root, 0)) for (const c of modelRefOf(sem, sem.argument(root, 0)!, depth + 1).classes) ref.classes.add(c);
  }
  if (root.type === 'identifier') {
    for (const b of sem.bindings(root)) {
      ref.bindings.add(b);
      if (b.kind === 'param' && ref.classes.size === 0 && depth < 3) {
        const passed = callerArguments(sem, b);
        for (const arg of passed) for (const c of modelRefOf(sem, arg, depth + 1).classes) ref.classes.add(c);
        if (passed.length === 0) for (const c of unboundModelCandidates(sem, b)) ref.classes.add(c);
      }
      // A loop target over an ensemble stands for each of its members.
      const iterable = b.iterated ? (b.value ?? (b.unpack && b.unpack.index === 1 ? enumeratedIterable(sem, b.unpack.from) : null)) : null;
      if (!iterable) continue;
      for (const member of memberExpressions(sem, iterable, depth + 1) ?? []) for (const c of modelRefOf(sem, member, depth + 1).classes) ref.classes.add(c);
    }
  }
  return ref;
}

/** `enumerate(members)` → `members`. */
function enumeratedIterable(sem: Semantics, expr: SyntaxNode): SyntaxNode | null {
  const n = unwrapParens(expr);
  if (n.type !== 'call' || sem.callee(n).qualifiedName !== 'builtins.enumerate') return null;
  return sem.argument(n, 0);
}

function mergeRefs(refs: ModelRef[]): ModelRef {
  const out: ModelRef = { classes: new Set(), bindings: new Set() };
  for (const r of refs) {
    for (const c of r.classes) out.classes.add(c);
    for (const b of r.bindings) out.bindings.add(b);
  }
  return out;
}

function refMatches(sem: Semantics, a: ModelRef, b: ModelRef): boolean {
  for (const c of a.classes) {
    for (const d of b.classes) if (c === d || sem.ancestry(c).includes(d) || sem.ancestry(d).includes(c)) return true;
  }
  for (const x of a.bindings) if (b.bindings.has(x)) return true;
  return false;
}

// ---------------------------------------------------------------------------------------------------------------
// Messages, figures and fixes.

function describeSamples(samples: SampleSet): string {
  const count = samples.count ? countLabel(samples.count) : samples.countValue !== null ? String(samples.countValue) : null;
  const model = `\`${samples.model.text.length > 40 ? samples.model.text.slice(0, 37) + '...' : samples.model.text}\``;
  switch (samples.mode) {
    case 'ensemble':
      return `The outputs of the ensemble members in ${model}`;
    case 'listed':
      return `The outputs of the ${count ?? ''} ensemble members listed here`.replace('  ', ' ');
    case 'vectorised':
      return `The outputs of ${model} along a sample axis of ${count ?? 'repeated'} copies of the input`;
    default:
      return count ? `The outputs of ${count} stochastic passes of ${model}` : `The outputs of repeated stochastic passes of ${model}`;
  }
}

function countLabel(count: SyntaxNode): string {
  const n = unwrapParens(count);
  if (n.type === 'integer') return n.text;
  return `\`${n.text}\``;
}

/** The number of samples, when it folds. */
function countValue(sem: Semantics, samples: SampleSet): number | null {
  if (samples.count) {
    const v = sem.fold(samples.count);
    if (typeof v === 'number' && Number.isInteger(v) && v > 0) return v;
    const n = unwrapParens(samples.count);
    if (samples.mode === 'ensemble') {
      const members = memberExpressions(sem, n, 0);
      if (members) return members.length;
    }
    return null;
  }
  return samples.countValue;
}

/** Hover figures: the number of samples T and the log T that the log-mean-exp subtracts. */
function figuresFor(sem: Semantics, samples: SampleSet): Figure[] {
  const t = countValue(sem, samples);
  if (t === null) return [];
  return [
    { label: 'samples averaged (T)', value: t },
    { label: 'log T subtracted by the log-mean-exp', value: formatNumber(Math.log(t)), source: 'log p̂ = logsumexp_t(log p_t) − log T (Gal & Ghahramani 2016)' },
  ];
}

/** log((1/T)·Σ exp(a_t)) computed stably: the log of the mean of the exponentials (the predictive log-probability). */
export function logMeanExp(values: readonly number[]): number {
  if (values.length === 0) return Number.NaN;
  const m = Math.max(...values);
  if (!Number.isFinite(m)) return m;
  let s = 0;
  for (const v of values) s += Math.exp(v - m);
  return m + Math.log(s) - Math.log(values.length);
}

/** The arithmetic mean (what the flagged code computes from log-probabilities). */
export function arithmeticMean(values: readonly number[]): number {
  let s = 0;
  for (const v of values) s += v;
  return s / values.length;
}

/** Fixes: move the normalisation inside the average, or rewrite the average to a log-mean-exp (both exact). */
function fixesFor(context: RuleContext, average: Average, uses: PredictiveUse[], binary: boolean): Fix[] {
  const sem = context.sem;
  const { samples, form } = average;
  if (samples.foreignArrays || form.type === 'running') return [];
  if (form.type === 'stacked' && (form.axis < 0 || form.keepdim)) return [];
  const node = average.node;
  const torch = sem.moduleAlias(node, 'torch');
  const operandText = (): string | null => {
    if (form.type === 'stacked') return form.operand.text;
    if (form.type === 'list-sum') return torch ? `${torch}.stack(${form.list.text})` : null;
    if (form.type === 'generator-sum') return torch ? `${torch}.stack([${form.generator.text.slice(1, -1)}])` : null;
    return null;
  };
  const axis = form.type === 'stacked' ? form.axis : 0;
  const operand = operandText();
  if (!operand) return [];

  if (samples.kind === 'logprobs') {
    const log = logOfCount(context, average);
    if (!log || !torch) return [];
    const text = `${torch}.logsumexp(${operand}, dim=${axis}) - ${log.text}`;
    return [{ title: 'Average the probabilities: take the log-mean-exp of the log-probabilities', safety: 'safe', edits: [context.replace(node, wrapFor(node, text)), ...log.edits] }];
  }

  // The average is the direct input of a softmax / sigmoid: normalise each sample, then average.
  const direct = uses.find((u) => u.direct && (u.kind === 'softmax' || u.kind === 'sigmoid') && u.node.type === 'call' && u.node.contains(node));
  if (direct && !average.binding) {
    const normalised = normalisedSamplesText(context, average, direct);
    if (normalised) return [{ title: `Apply ${direct.kind} to each sample before averaging`, safety: 'safe', edits: [context.replace(direct.node, wrapFor(direct.node, normalised))] }];
    return [];
  }
  if (binary) {
    if (!isPrimary(operand)) return [];
    const text = `${operand}.sigmoid().mean(dim=${axis}).logit()`;
    return [{ title: 'Average the probabilities: use the log-odds of the mean sigmoid', safety: 'safe', edits: [context.replace(node, wrapFor(node, text))] }];
  }
  const log = logOfCount(context, average);
  if (!log || !torch) return [];
  const classDim = classDimension(sem, uses, axis);
  if (classDim === null) return [];
  const inner = isPrimary(operand) ? `${operand}.log_softmax(dim=${classDim})` : `(${operand}).log_softmax(dim=${classDim})`;
  const text = `${torch}.logsumexp(${inner}, dim=${axis}) - ${log.text}`;
  return [{ title: 'Average the probabilities: replace the mean logit by the log of the mean softmax (log-mean-exp)', safety: 'safe', edits: [context.replace(node, wrapFor(node, text)), ...log.edits] }];
}

/** The class axis for `log_softmax` on the stacked samples: from the consumer's `dim` (shifted past the sample axis), else −1. */
function classDimension(sem: Semantics, uses: PredictiveUse[], axis: number): number | null {
  const withDim = uses.find((u) => u.dim);
  if (!withDim?.dim) return -1;
  const d = sem.fold(withDim.dim);
  if (typeof d !== 'number' || !Number.isInteger(d)) return null;
  return d < 0 ? d : d >= axis ? d + 1 : d;
}

/** The text that replaces `softmax(average)`: the average of the per-sample normalisations. */
function normalisedSamplesText(context: RuleContext, average: Average, use: PredictiveUse): string | null {
  const sem = context.sem;
  const call = use.node;
  const { form } = average;
  const normaliser = normaliserOf(sem, call);
  if (!normaliser) return null;
  const averageNode = average.node;
  // The consumer's text with the average replaced by `inner` (and the class dim shifted past the new sample axis).
  const rebuilt = (inner: string, shift: number): string | null => {
    const parts: { start: number; end: number; text: string }[] = [{ start: averageNode.start, end: averageNode.end, text: inner }];
    if (normaliser.family === 'softmax') {
      if (!normaliser.dim) return null;
      const d = sem.fold(normaliser.dim);
      if (typeof d !== 'number' || !Number.isInteger(d)) return null;
      if (d >= 0 && shift > 0) parts.push({ start: normaliser.dim.start, end: normaliser.dim.end, text: String(d + 1) });
    }
    return spliceText(call, parts);
  };
  if (form.type === 'stacked') {
    const inner = rebuilt(form.operand.text, form.axis === 0 ? 1 : 0);
    if (!inner) return null;
    if (normaliser.family === 'softmax' && normaliser.dim && form.axis > 0) {
      const d = sem.fold(normaliser.dim);
      if (typeof d !== 'number' || d < 0 || d >= form.axis) return null;
    }
    return spliceText(averageNode, [{ start: form.operand.start, end: form.operand.end, text: inner }]);
  }
  if (form.type === 'generator-sum') {
    const inner = rebuilt(form.element.text, 0);
    if (!inner) return null;
    return spliceText(averageNode, [{ start: form.element.start, end: form.element.end, text: inner }]);
  }
  if (form.type === 'list-sum') {
    const torch = sem.moduleAlias(averageNode, 'torch');
    if (!torch) return null;
    const inner = rebuilt(`${torch}.stack(${form.list.text})`, 1);
    return inner ? `${inner}.mean(dim=0)` : null;
  }
  return null;
}

/** A node's text with some of its sub-ranges replaced. */
function spliceText(node: SyntaxNode, parts: { start: number; end: number; text: string }[]): string {
  const sorted = [...parts].sort((a, b) => b.start - a.start);
  let text = node.text;
  for (const p of sorted) text = text.slice(0, p.start - node.start) + p.text + text.slice(p.end - node.start);
  return text;
}

/** `math.log(T)` for the number of samples, with an `import math` edit when the file has none. */
function logOfCount(context: RuleContext, average: Average): { text: string; edits: TextEdit[] } | null {
  const sem = context.sem;
  const at = average.node;
  const count = countExpression(sem, average);
  if (!count) return null;
  const math = sem.moduleAlias(at, 'math');
  if (math) return { text: `${math}.log(${count})`, edits: [] };
  const numpy = sem.moduleAlias(at, 'numpy');
  if (numpy) return { text: `${numpy}.log(${count})`, edits: [] };
  const insert = importInsertion(sem, at);
  if (insert === null) return null;
  return { text: `math.log(${count})`, edits: [context.replaceRange(at, insert, insert, 'import math\n')] };
}

/** Text for T that is valid where the average is: the divisor of `sum(...)/T`, the loop count, `len(members)`, or `S.shape[d]`. */
function countExpression(sem: Semantics, average: Average): string | null {
  const { samples, form, node } = average;
  if (node.type === 'binary_operator') {
    const right = node.child('right');
    if (right && isPure(right) && visibleAt(sem, right, node)) return right.text;
  }
  if (samples.count && isPure(samples.count) && visibleAt(sem, samples.count, node)) {
    return samples.mode === 'ensemble' ? `len(${samples.count.text})` : samples.count.text;
  }
  if (form.type === 'stacked' && unwrapParens(form.operand).type === 'identifier') return `${form.operand.text}.shape[${form.axis}]`;
  if (samples.countValue !== null) return String(samples.countValue);
  return null;
}

/** True for names, attribute chains, numbers and constant subscripts (safe to repeat). */
function isPure(expr: SyntaxNode): boolean {
  // A loop down the chain rather than recursion: attribute and subscript chains can be thousands long.
  for (let n = unwrapParens(expr); ; ) {
    if (n.type === 'identifier' || n.type === 'integer') return true;
    if (n.type === 'attribute') {
      const object = n.child('object');
      if (!object) return false;
      n = unwrapParens(object);
      continue;
    }
    if (n.type === 'subscript') {
      const idx = n.childrenOf('subscript');
      const value = n.child('value');
      if (!value || idx.length !== 1 || (idx[0]!.type !== 'string' && idx[0]!.type !== 'integer')) return false;
      n = unwrapParens(value);
      continue;
    }
    return false;
  }
}

/** True when every name in an expression means the same thing at another place (same file, same bindings). */
function visibleAt(sem: Semantics, expr: SyntaxNode, at: SyntaxNode): boolean {
  if (expr.file !== at.file) return false;
  const module = sem.moduleOf(at);
  for (const n of expr.subtree()) {
    if (n.type !== 'identifier' || isAttributeName(n)) continue;
    const here = sem.bindings(n);
    const there = module.lookup(n.text, at);
    if (here.length === 0 || there.length !== here.length || here.some((b) => !there.includes(b))) return false;
  }
  return true;
}

/** Where to insert `import math`: the start of the first module-level import that is not `from __future__`. */
function importInsertion(sem: Semantics, at: SyntaxNode): number | null {
  const root = sem.moduleOf(at).syntax.root;
  let afterFuture: number | null = null;
  for (const stmt of root.namedChildren) {
    if (stmt.type === 'future_import_statement') {
      afterFuture = stmt.end + 1;
      continue;
    }
    if (stmt.type === 'import_statement' || stmt.type === 'import_from_statement') return stmt.start;
  }
  return afterFuture;
}

/** True when a text is a primary expression (a name, call, attribute or subscript chain) that needs no parentheses. */
function isPrimary(text: string): boolean {
  let depth = 0;
  for (let i = 0; i < text.length; i++) {
    const c = text[i]!;
    if (c === '(' || c === '[' || c === '{') depth++;
    else if (c === ')' || c === ']' || c === '}') depth--;
    else if (depth === 0 && /[\s+\-*/%@<>=!&|^~,]/.test(c)) return false;
  }
  return true;
}

/** Wraps a replacement in parentheses when the replaced node sits where a lower-precedence expression would change meaning. */
function wrapFor(node: SyntaxNode, text: string): string {
  if (isPrimary(text)) return text;
  const parent = node.parent;
  const safe = !parent || ['assignment', 'argument_list', 'keyword_argument', 'return_statement', 'expression_list', 'parenthesized_expression', 'list', 'tuple', 'expression_statement', 'pair', 'augmented_assignment'].includes(parent.type);
  return safe ? text : `(${text})`;
}

/** Values an expression may hold (names followed through simple assignments), including itself when nothing is known. */
function valueOrigins(sem: Semantics, expr: SyntaxNode): SyntaxNode[] {
  const node = unwrapParens(expr);
  if (node.type !== 'identifier' && node.type !== 'attribute') return [node];
  const out = sem.origins(node).map((o) => o.node);
  return out.length ? out : [node];
}
