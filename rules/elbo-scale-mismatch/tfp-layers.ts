// TensorFlow Probability side of elbo-scale-mismatch: Flipout / Reparameterization layers whose divergence function
// is not divided by N, in a Keras model compiled with a mean-reduced loss and trained with `fit` (SOURCES.md §1.6).
import { type ClassInfo, type SyntaxNode, unwrapParens } from '../../server/src/engine/api';
import { type Flow, type Frame } from './flow';
import { ONE, over, type Reduction, type Scale, times } from './scale';

const LAYER = /^(tensorflow_probability|tfp)(\.python)?\.layers\.((dense_variational|conv_variational)\.)?(Dense(Flipout|Reparameterization|LocalReparameterization)|Convolution[123]D(Flipout|Reparameterization))$/;
const VARIATIONAL_V2 = /^(tensorflow_probability|tfp)(\.python)?\.layers\.(dense_variational_v2\.)?DenseVariational$/;
const KL_DIVERGENCE = /^(tensorflow_probability|tfp)(\.python)?\.distributions\.(kl\.)?kl_divergence$/;
const SEQUENTIAL = ['tensorflow.keras.Sequential', 'tensorflow.keras.models.Sequential', 'keras.Sequential', 'keras.models.Sequential', 'tf_keras.Sequential'];
const MODEL = ['tensorflow.keras.Model', 'tensorflow.keras.models.Model', 'keras.Model', 'keras.models.Model', 'tf_keras.Model'];

/** A variational layer whose KL counts N times too much (or otherwise off) against the mean-reduced Keras loss. */
export interface LayerFinding {
  layer: SyntaxNode;
  layerName: string;
  /** `kernel_divergence_fn` or `kl_weight`, as given (null: the unscaled default). */
  divergence: SyntaxNode | null;
  argumentName: 'kernel_divergence_fn' | 'kl_weight';
  /** The factor on the layer's KL. */
  klScale: Scale;
  reduction: Reduction;
  compile: SyntaxNode;
  fit: SyntaxNode;
  loss: SyntaxNode | null;
  n: number | null;
  b: number | null;
  /** The training inputs given to `fit` (their rows are N). */
  fitInputs: SyntaxNode | null;
}

/** Checks one call that may construct a TFP variational layer. */
export function checkLayer(flow: Flow, call: SyntaxNode): LayerFinding | null {
  const sem = flow.sem;
  const q = sem.callee(call).qualifiedName ?? '';
  const v1 = LAYER.test(q);
  const v2 = VARIATIONAL_V2.test(q);
  if (!v1 && !v2) return null;
  const argumentName = v1 ? 'kernel_divergence_fn' : 'kl_weight';
  const divergence = sem.argument(call, 99, argumentName);
  let klScale: Scale = ONE;
  if (divergence) {
    if (unwrapParens(divergence).type === 'none') {
      if (v1) return null;
    } else {
      const s = v1 ? divergenceScale(flow, divergence) : flow.scaleOf(divergence, null);
      if (!s || s.opaque) return null;
      klScale = s;
    }
  }
  const training = trainingOf(flow, call);
  if (!training) return null;
  const x = sem.argument(training.fit, 0, 'x');
  const batchArg = sem.argument(training.fit, 99, 'batch_size');
  const batchFolded = batchArg ? sem.fold(batchArg) : null;
  // Keras' fit uses batches of 32 when batch_size is not given (Keras Model.fit documentation; from memory).
  const b = batchArg ? (typeof batchFolded === 'number' ? batchFolded : null) : 32;
  return {
    layer: call,
    layerName: q.split('.').pop() ?? q,
    divergence,
    argumentName,
    klScale,
    reduction: training.reduction,
    compile: training.compile,
    fit: training.fit,
    loss: training.loss,
    n: x ? flow.lengthOf(x, null) : null,
    b,
    fitInputs: x,
  };
}

/** The factor a divergence function puts on `kl_divergence(q, p)` (`lambda q, p, _: kl_divergence(q, p) / n`), or null. */
function divergenceScale(flow: Flow, fnExpr: SyntaxNode): Scale | null {
  const sem = flow.sem;
  let body: SyntaxNode | null = null;
  for (const v of flow.values(fnExpr, null)) {
    const node = unwrapParens(v.node);
    if (node.type === 'lambda') body = node.child('body');
    else if (v.binding?.kind === 'def' && v.binding.definition) {
      const fn = sem.moduleOf(v.binding.definition).functionByNode.get(v.binding.definition.id);
      if (fn && fn.returns.length === 1) body = fn.returns[0]!;
    } else if (node.type === 'identifier' || node.type === 'attribute') {
      const symbol = sem.symbol(node);
      if (symbol?.kind === 'function' && symbol.fn.returns.length === 1) body = symbol.fn.returns[0]!;
    }
    if (body) break;
  }
  if (!body) return null;
  return factorOnKl(flow, body);
}

/** Splits `kl_divergence(q, p) * a / b` into the factor on the KL call. */
function factorOnKl(flow: Flow, expr: SyntaxNode, depth = 0): Scale | null {
  // Bounded: a product or quotient of thousands of factors must not overflow the stack.
  if (depth > 16) return null;
  const sem = flow.sem;
  const node = unwrapParens(expr);
  if (node.type === 'call') {
    const q = sem.callee(node).qualifiedName ?? '';
    return KL_DIVERGENCE.test(q) ? ONE : null;
  }
  if (node.type !== 'binary_operator') return null;
  const op = node.child('operator')?.text;
  const left = node.child('left')!;
  const right = node.child('right')!;
  if (op === '/') {
    const inner = factorOnKl(flow, left, depth + 1);
    return inner ? over(inner, flow.scaleOf(right, null)) : null;
  }
  if (op === '*') {
    const l = factorOnKl(flow, left, depth + 1);
    if (l) return times(l, flow.scaleOf(right, null));
    const r = factorOnKl(flow, right, depth + 1);
    if (r) return times(r, flow.scaleOf(left, null));
  }
  return null;
}

/** The Keras model a layer belongs to, compiled (with its loss reduction) and trained with `fit`. */
function trainingOf(flow: Flow, layer: SyntaxNode): { compile: SyntaxNode; fit: SyntaxNode; reduction: Reduction; loss: SyntaxNode | null } | null {
  const models = modelsOf(flow, layer);
  if (models.length === 0) return null;
  const sem = flow.sem;
  const owner = sem.workspace.analysisOfNode(layer) ?? sem.analysis;
  let compile: SyntaxNode | null = null;
  let fit: SyntaxNode | null = null;
  for (const file of [...sem.workspace.dependentsOf(owner.file.absPath)].sort()) {
    // The `.compile(...)` and `.fit(...)` calls of the file, from its call index (no walk of the whole file per layer).
    for (const node of [...sem.callsNamed(file, 'compile'), ...sem.callsNamed(file, 'fit')]) {
      const callee = sem.callee(node);
      if ((callee.method !== 'compile' && callee.method !== 'fit') || !callee.receiver) continue;
      if (!isModel(flow, callee.receiver, models)) continue;
      if (callee.method === 'compile') compile ??= node;
      else fit ??= node;
    }
  }
  if (!compile || !fit) return null;
  const loss = sem.argument(compile, 1, 'loss');
  const reduction = lossReduction(flow, loss);
  if (!reduction) return null;
  return { compile, fit, reduction, loss };
}

/** Model constructions (Sequential / functional Model calls, or classes) that contain the layer. */
function modelsOf(flow: Flow, layer: SyntaxNode): (SyntaxNode | ClassInfo)[] {
  const sem = flow.sem;
  const out: (SyntaxNode | ClassInfo)[] = [];
  // tf.keras.Sequential([... layer ...]) (directly, or through a list bound to a name).
  const parent = layer.parent;
  if (parent?.type === 'list') {
    const holder = parent.parent;
    if (holder?.type === 'argument_list' && holder.parent?.type === 'call' && sem.isCallTo(holder.parent, SEQUENTIAL)) out.push(holder.parent);
    const assign = holder?.type === 'assignment' ? holder : null;
    const target = assign?.child('left');
    if (target?.type === 'identifier') {
      const file = sem.workspace.analysisOfNode(layer)?.file.absPath ?? sem.analysis.file.absPath;
      for (const n of kerasModelCalls(flow, file).sequential) {
        const arg = sem.argument(n, 0, 'layers');
        if (arg && flow.values(arg, null).some((v) => v.node === parent)) out.push(n);
      }
    }
  }
  // model.add(layer)
  if (parent?.type === 'argument_list' && parent.parent?.type === 'call') {
    const callee = sem.callee(parent.parent);
    if (callee.method === 'add' && callee.receiver) for (const v of flow.values(callee.receiver, null)) if (v.node.type === 'call') out.push(v.node);
  }
  // Functional: layer(...)(x) feeding the outputs of tf.keras.Model(inputs, outputs).
  if (parent?.type === 'call' && layer.field === 'function') {
    const scopeNode = sem.moduleOf(layer).scopeOf(layer).node;
    const file = sem.workspace.analysisOfNode(layer)?.file.absPath ?? sem.analysis.file.absPath;
    for (const n of kerasModelCalls(flow, file).functional) {
      if (!scopeNode.contains(n)) continue;
      const outputs = sem.argument(n, 1, 'outputs');
      if (outputs && reaches(flow, outputs, parent)) out.push(n);
    }
  }
  // Subclassed model: self.x = layer(...) in a Keras Model subclass.
  const cls = sem.moduleOf(layer).enclosingClass(layer);
  if (cls && sem.isSubclassOf(cls, MODEL)) out.push(cls);
  return out;
}

/** The `Sequential(...)` and functional `Model(...)` constructions of a file (also under aliases), found once per file. */
function kerasModelCalls(flow: Flow, file: string): { sequential: SyntaxNode[]; functional: SyntaxNode[] } {
  const memo = flow.memoTable<string, { sequential: SyntaxNode[]; functional: SyntaxNode[] }>('elbo-scale-mismatch:keras-models');
  const cached = memo.get(file);
  if (cached) return cached;
  const out = { sequential: [] as SyntaxNode[], functional: [] as SyntaxNode[] };
  for (const n of flow.sem.callsIn(file)) {
    if (flow.sem.isCallTo(n, SEQUENTIAL)) out.sequential.push(n);
    else if (flow.sem.isCallTo(n, MODEL)) out.functional.push(n);
  }
  memo.set(file, out);
  return out;
}

/** True when an expression's value is computed (through names and calls) from a given call. */
function reaches(flow: Flow, expr: SyntaxNode, target: SyntaxNode): boolean {
  const stack: SyntaxNode[] = [expr];
  const seen = new Set<SyntaxNode>();
  let steps = 0;
  while (stack.length && steps++ < 200) {
    const node = unwrapParens(stack.pop()!);
    if (node === target) return true;
    if (seen.has(node)) continue;
    seen.add(node);
    if (node.type === 'identifier') {
      for (const v of flow.values(node, null)) if (v.node !== node) stack.push(v.node);
    } else if (node.type === 'call') {
      const fn = node.child('function');
      if (fn) stack.push(fn);
      for (const a of node.child('arguments')?.namedChildren ?? []) stack.push(a);
    } else for (const c of node.namedChildren) stack.push(c);
  }
  return false;
}

function isModel(flow: Flow, receiver: SyntaxNode, models: (SyntaxNode | ClassInfo)[]): boolean {
  // Follow names, and calls of workspace functions to what they return (`model = build_model(n)`).
  const stack: { node: SyntaxNode; frame: Frame | null; depth: number }[] = [{ node: receiver, frame: null, depth: 0 }];
  while (stack.length) {
    const { node, frame, depth } = stack.pop()!;
    for (const v of flow.values(node, frame)) {
      if (models.includes(v.node)) return true;
      if (v.node.type === 'call' && depth < 4) {
        const resolved = flow.resolveCall(v.node, v.frame);
        if (resolved && !resolved.receiver) for (const r of resolved.fn.returns) stack.push({ node: r, frame: flow.frameFor(v.node, resolved, v.frame), depth: depth + 1 });
      }
    }
  }
  const type = flow.typeOf(receiver, null);
  return type?.kind === 'instance' && models.some((m) => m === type.cls);
}

/** The reduction Keras applies to a compiled loss: the mean over the batch unless a Loss object asks for a sum. */
function lossReduction(flow: Flow, loss: SyntaxNode | null): Reduction | null {
  if (!loss) return null;
  const sem = flow.sem;
  for (const v of flow.values(loss, null)) {
    const node = unwrapParens(v.node);
    if (node.type === 'string' || node.type === 'lambda' || node.type === 'identifier' || node.type === 'attribute') return 'mean';
    if (node.type === 'call') {
      const reduction = sem.argument(node, 99, 'reduction');
      if (!reduction) return 'mean';
      const folded = sem.fold(reduction);
      const text = typeof folded === 'string' ? folded : (sem.qualifiedName(reduction) ?? reduction.text);
      if (/sum_over_batch_size|SUM_OVER_BATCH_SIZE|AUTO|auto/.test(text)) return 'mean';
      if (/(^|\.)(sum|SUM)$/.test(text)) return 'sum';
      return null;
    }
  }
  return 'mean';
}
