// Pyro side of elbo-scale-mismatch: an observation `pyro.plate` sized from the minibatch (or unsized) in a model
// that SVI is fed minibatches, with no `subsample_size` / `subsample` / `poutine.scale` restoring N/B (SOURCES.md §1.5).
import { type Binding, type FunctionInfo, type SyntaxNode, unwrapParens } from '../../server/src/engine/api';
import { type Arg, descendants, type Flow, type Frame, type IterableInfo } from './flow';

const PLATES = ['pyro.plate', 'pyro.primitives.plate'];
const SAMPLES = ['pyro.sample', 'pyro.primitives.sample'];
const SVI = ['pyro.infer.SVI', 'pyro.infer.svi.SVI'];
const SCALES = ['pyro.poutine.scale', 'pyro.poutine.handlers.scale'];

/** An observation plate that under-weights the likelihood, with what the analysis found about how it is fed. */
export interface PlateFinding {
  plate: SyntaxNode;
  size: SyntaxNode | null;
  model: FunctionInfo;
  /** The `svi.step(...)` call that feeds minibatches, and the frame binding the model's parameters to its arguments. */
  step: SyntaxNode;
  frame: Frame;
  loader: IterableInfo | null;
  n: number | null;
  b: number | null;
}

/** Checks one `pyro.plate(...)` call. */
export function checkPlate(flow: Flow, call: SyntaxNode): PlateFinding | null {
  const sem = flow.sem;
  if (!sem.isCallTo(call, PLATES)) return null;
  if (sem.argument(call, 2, 'subsample_size') || sem.argument(call, 3, 'subsample')) return null;
  const size = sem.argument(call, 1, 'size');
  if (!size || unwrapParens(size).type === 'none') return checkUnsized(flow, call);
  return checkSized(flow, call, size);
}

function checkSized(flow: Flow, call: SyntaxNode, size: SyntaxNode): PlateFinding | null {
  const context = observationContext(flow, call);
  if (!context) return null;
  for (const feed of minibatchFeeds(flow, context.model)) {
    const s = flow.scaleOf(size, feed.frame);
    const isBatch = !s.opaque && s.dims.n === 0 && s.dims.b === 1 && s.dims.p === 0;
    // A literal equal to the loader's batch size is the batch size too.
    const literal = !s.opaque && s.symbols.length === 0 && s.coef !== null && feed.loader?.batchSize !== null && feed.loader?.batchSize === s.coef;
    if (isBatch || literal) return { plate: call, size, model: context.model, step: feed.step, frame: feed.frame, loader: feed.loader, n: feed.n, b: s.symbols.find((u) => u.value !== null)?.value ?? feed.loader?.batchSize ?? null };
  }
  return null;
}

function checkUnsized(flow: Flow, call: SyntaxNode): PlateFinding | null {
  const context = observationContext(flow, call);
  if (!context) return null;
  const feed = minibatchFeeds(flow, context.model)[0];
  if (!feed) return null;
  return { plate: call, size: null, model: context.model, step: feed.step, frame: feed.frame, loader: feed.loader, n: feed.n, b: feed.loader?.batchSize ?? null };
}

/** The model function of a plate that holds an observed `pyro.sample`, when nothing rescales it. */
function observationContext(flow: Flow, call: SyntaxNode): { model: FunctionInfo } | null {
  const sem = flow.sem;
  const body = plateBody(call);
  if (!body) return null;
  let observed = false;
  for (const n of descendants(body)) {
    if (n.type === 'function_definition' || n.type === 'lambda') continue;
    if (n.type === 'call' && sem.isCallTo(n, SAMPLES)) {
      const obs = sem.argument(n, 99, 'obs');
      if (obs && unwrapParens(obs).type !== 'none') observed = true;
    }
  }
  if (!observed) return null;
  const module = sem.moduleOf(call);
  const model = module.enclosingFunction(call);
  if (!model) return null;
  // poutine.scale as a decorator of the model, or as a context around the plate.
  if (model.decorators.some((d) => /scale/.test(d.text) && d.namedChildren.some((c) => (c.type === 'call' ? sem.isCallTo(c, SCALES) : sem.qualifiedName(c) !== null && SCALES.includes(sem.qualifiedName(c)!))))) return null;
  for (let n = call.parent; n && n !== model.node; n = n.parent) {
    if (n.type !== 'with_statement') continue;
    for (const item of descendants(n.children.find((c) => c.type === 'with_clause') ?? n)) {
      if (item.type === 'call' && sem.isCallTo(item, SCALES)) return null;
    }
  }
  return { model };
}

/** The block a plate governs (`with pyro.plate(...):` or `for i in pyro.plate(...):`). */
function plateBody(call: SyntaxNode): SyntaxNode | null {
  for (let n = call.parent; n; n = n.parent) {
    if (n.type === 'with_statement' || n.type === 'for_statement') return n.child('body');
    if (!['as_pattern', 'with_item', 'with_clause', 'argument_list'].includes(n.type) && !(n.type === 'for_statement')) return null;
  }
  return null;
}

/** `svi.step(...)` calls that pass minibatches to this model, each with the frame binding the model's parameters. */
function minibatchFeeds(flow: Flow, model: FunctionInfo): { step: SyntaxNode; frame: Frame; loader: IterableInfo | null; n: number | null }[] {
  const sem = flow.sem;
  const out: { step: SyntaxNode; frame: Frame; loader: IterableInfo | null; n: number | null }[] = [];
  const owner = sem.workspace.analysisOfNode(model.node) ?? sem.analysis;
  const files = [...sem.workspace.dependentsOf(owner.file.absPath)].sort();
  const svis: SyntaxNode[] = [];
  for (const file of files) {
    const analysis = sem.workspace.analysis(file);
    if (!analysis) continue;
    for (const node of analysis.syntax.nodes) {
      if (node.type !== 'call' || !sem.isCallTo(node, SVI)) continue;
      const modelArg = sem.argument(node, 0, 'model');
      if (modelArg && refersTo(flow, modelArg, model)) svis.push(node);
    }
  }
  if (svis.length === 0) return out;
  for (const file of files) {
    const analysis = sem.workspace.analysis(file);
    if (!analysis) continue;
    for (const node of analysis.syntax.nodes) {
      if (node.type !== 'call') continue;
      const callee = sem.callee(node);
      if (callee.method !== 'step' || !callee.receiver) continue;
      if (!flow.values(callee.receiver, null).some((v) => svis.includes(v.node))) continue;
      const frame = stepFrame(flow, node, model);
      let loader: IterableInfo | null = null;
      let n: number | null = null;
      let fed = false;
      for (const arg of node.child('arguments')?.namedChildren ?? []) {
        const value = arg.type === 'keyword_argument' ? arg.child('value') : arg;
        if (!value) continue;
        const kind = flow.tensorKind(value, null);
        if (kind.kind === 'batch') {
          fed = true;
          loader ??= kind.loader;
          n ??= datasetLengthOfBatch(flow, value, kind.loader);
        }
      }
      if (fed) out.push({ step: node, frame, loader, n });
    }
  }
  return out;
}

/** N for a minibatch tensor: its loader's dataset, or the full array it is indexed from (`x[idx]`). */
function datasetLengthOfBatch(flow: Flow, value: SyntaxNode, loader: IterableInfo | null): number | null {
  if (loader?.kind === 'loader') return flow.loaderDatasetLength(loader);
  for (const v of flow.values(value, null)) {
    const node = unwrapParens(v.node);
    if (node.type === 'subscript' && node.child('value')) return flow.lengthOf(node.child('value')!, v.frame);
  }
  return null;
}

/** True when a model argument given to SVI is this function (directly, a PyroModule instance whose forward it is, or a bound method). */
function refersTo(flow: Flow, expr: SyntaxNode, model: FunctionInfo): boolean {
  const sem = flow.sem;
  const symbol = sem.symbol(expr);
  if (symbol?.kind === 'function' && symbol.fn === model) return true;
  for (const v of flow.values(expr, null)) {
    if (v.binding?.kind === 'def' && v.binding.definition === model.node) return true;
    if (v.node.type === 'call') {
      const callee = sem.callee(v.node);
      if (callee.symbol?.kind === 'class' && model.owner && sem.findMethod(callee.symbol.cls, 'forward') === model) return true;
    }
  }
  const type = flow.typeOf(expr, null);
  if (type?.kind === 'instance' && sem.findMethod(type.cls, 'forward') === model) return true;
  const node = unwrapParens(expr);
  if (node.type === 'attribute') {
    const object = node.child('object');
    const owner = object ? flow.typeOf(object, null) : null;
    if (owner?.kind === 'instance' && sem.findMethod(owner.cls, node.child('attribute')?.text ?? '') === model) return true;
  }
  return false;
}

/** Binds the model's parameters to the arguments of `svi.step(...)` (SVI passes them on to the model and the guide). */
function stepFrame(flow: Flow, step: SyntaxNode, model: FunctionInfo): Frame {
  const args = new Map<Binding, Arg>();
  const params = model.owner ? model.params.slice(1) : model.params;
  params.forEach((p, i) => {
    const arg = flow.sem.argument(step, i, p.name);
    args.set(p, arg ? { node: arg, frame: null } : { node: p.value, frame: null });
  });
  return { args, depth: 1 };
}

/** A model parameter (not self, no default) used inside the plate: the minibatch tensor whose length B is. */
export function batchTensorParameter(finding: PlateFinding): string | null {
  const body = plateBody(finding.plate);
  const params = finding.model.owner ? finding.model.params.slice(1) : finding.model.params;
  for (const p of params) {
    if (p.value) continue;
    if (!body) return p.name;
    for (const n of descendants(body)) if (n.type === 'identifier' && n.text === p.name) return p.name;
  }
  return null;
}
