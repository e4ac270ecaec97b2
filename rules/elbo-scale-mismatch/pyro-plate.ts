// Pyro side of elbo-scale-mismatch: an observation `pyro.plate` sized from the minibatch (or unsized) in a model
// that SVI is fed minibatches, with no `subsample_size` / `subsample` / `poutine.scale` restoring N/B (SOURCES.md §1.5).
import { type Binding, type FunctionInfo, type SyntaxNode, unwrapParens } from '../../server/src/engine/api';
import { type Arg, type Flow, type Frame, type IterableInfo } from './flow';

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
  for (const n of body.subtree()) {
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
    for (const item of (n.children.find((c) => c.type === 'with_clause') ?? n).subtree()) {
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

/** A `svi.step(...)` call that feeds minibatches to a model, with the frame binding the model's parameters. */
interface Feed {
  step: SyntaxNode;
  frame: Frame;
  loader: IterableInfo | null;
  n: number | null;
}

/** How many calling contexts (call sites of the step's function, and of their callers) are tried per step call. */
const MAX_CONTEXTS = 32;
const CONTEXT_DEPTH = 3;

/**
 * `svi.step(...)` calls that pass minibatches to this model, each with the frame binding the model's parameters.
 * The model may reach SVI directly, through parameters of helpers (`fit(model, loader)` → `SVI(model, …)`), through
 * a function that returns the SVI object, or through an attribute; the step call is examined in each calling
 * context of its function, so that a helper used with several models is judged per call.
 */
function minibatchFeeds(flow: Flow, model: FunctionInfo): Feed[] {
  const sem = flow.sem;
  const memo = sem.workspace.memoTable<SyntaxNode, Feed[]>('elbo-scale-mismatch:pyro-feeds');
  const cached = memo.get(model.node);
  if (cached) return cached;
  const out: Feed[] = [];
  memo.set(model.node, out);
  const owner = sem.workspace.analysisOfNode(model.node) ?? sem.analysis;
  for (const file of flow.programFiles(owner.file.absPath)) {
    for (const step of stepCalls(flow, file)) {
      if (!acceptsKeywords(model, step)) continue;
      const receiver = sem.callee(step).receiver!;
      for (const context of callingContexts(flow, step)) {
        const svis = sviConstructions(flow, receiver, context, 0);
        if (!svis.some((svi) => refersTo(flow, sem.argument(svi.node, 0, 'model'), svi.frame, model, 0))) continue;
        let loader: IterableInfo | null = null;
        let n: number | null = null;
        let fed = false;
        for (const arg of step.child('arguments')?.namedChildren ?? []) {
          // `svi.step(*batch)` passes the tensors of the batch.
          const value = arg.type === 'keyword_argument' ? arg.child('value') : arg.type === 'list_splat' ? (arg.namedChildren[0] ?? null) : arg;
          if (!value) continue;
          const kind = flow.tensorKind(value, context);
          if (kind.kind === 'batch') {
            fed = true;
            loader ??= kind.loader;
            n ??= datasetLengthOfBatch(flow, value, context, kind.loader);
          }
        }
        if (fed) {
          out.push({ step, frame: stepFrame(flow, step, model, context), loader, n });
          break;
        }
      }
    }
  }
  return out;
}

/** False when a step call passes a keyword the model has no parameter for (that call cannot be feeding this model). */
function acceptsKeywords(model: FunctionInfo, step: SyntaxNode): boolean {
  const parameters = model.node.child('parameters');
  if (parameters?.namedChildren.some((p) => p.type === 'dictionary_splat_pattern')) return true;
  const names = new Set(model.params.map((p) => p.name));
  for (const a of step.child('arguments')?.namedChildren ?? []) {
    if (a.type === 'dictionary_splat') return true;
    if (a.type === 'keyword_argument' && !names.has(a.child('name')?.text ?? '')) return false;
  }
  return true;
}

/** The `<receiver>.step(...)` calls of a file (candidates for `svi.step`), from the file's call index. */
function stepCalls(flow: Flow, file: string): SyntaxNode[] {
  return flow.sem.callsNamed(file, 'step').filter((call) => call.child('function')!.type === 'attribute');
}

/**
 * The frames a call may run in: for a call inside a function that other workspace code calls, one frame per call
 * site (and per calling context of that site, a few levels up); otherwise the unbound frame.
 */
function callingContexts(flow: Flow, at: SyntaxNode): (Frame | null)[] {
  const sem = flow.sem;
  const contextsOf = (fn: FunctionInfo | null, depth: number): (Frame | null)[] => {
    if (!fn || depth >= CONTEXT_DEPTH || fn.params.length === 0) return [null];
    const sites = flow.callers(fn);
    if (sites.length === 0) return [null];
    const out: (Frame | null)[] = [];
    for (const site of sites) {
      const resolved = flow.resolveCall(site.call, null);
      if (!resolved || resolved.fn !== fn) continue;
      for (const outer of contextsOf(sem.moduleOf(site.call).enclosingFunction(site.call), depth + 1)) {
        out.push(flow.frameFor(site.call, resolved, outer));
        if (out.length >= MAX_CONTEXTS) return out;
      }
    }
    return out.length > 0 ? out : [null];
  };
  return contextsOf(sem.moduleOf(at).enclosingFunction(at), 0);
}

/** The `SVI(...)` constructions a value may be, through names, parameters, attributes and the returns of helpers. */
function sviConstructions(flow: Flow, expr: SyntaxNode, frame: Frame | null, depth: number): { node: SyntaxNode; frame: Frame | null }[] {
  const sem = flow.sem;
  if (depth > 4) return [];
  const out: { node: SyntaxNode; frame: Frame | null }[] = [];
  for (const v of flow.values(expr, frame)) {
    const node = unwrapParens(v.node);
    if (node.type !== 'call') continue;
    if (sem.isCallTo(node, SVI)) {
      out.push({ node, frame: v.frame });
      continue;
    }
    const resolved = flow.resolveCall(node, v.frame);
    if (!resolved || resolved.constructs) continue;
    const inner = flow.frameFor(node, resolved, v.frame);
    for (const r of resolved.fn.returns) out.push(...sviConstructions(flow, r, inner, depth + 1));
  }
  return out;
}

/** N for a minibatch tensor: its loader's dataset, or the full array it is indexed from (`x[idx]`). */
function datasetLengthOfBatch(flow: Flow, value: SyntaxNode, frame: Frame | null, loader: IterableInfo | null): number | null {
  if (loader?.kind === 'loader') return flow.loaderDatasetLength(loader);
  for (const v of flow.values(value, frame)) {
    const node = unwrapParens(v.node);
    if (node.type === 'subscript' && node.child('value')) return flow.lengthOf(node.child('value')!, v.frame);
  }
  return null;
}

/**
 * True when a model argument given to SVI is this function: the function itself (also through an import, a
 * parameter bound by the calling context or by every call site, or a name), a PyroModule instance whose forward it
 * is, or a bound method.
 */
function refersTo(flow: Flow, expr: SyntaxNode | null, frame: Frame | null, model: FunctionInfo, depth: number): boolean {
  if (!expr || depth > 6) return false;
  const sem = flow.sem;
  const symbol = sem.symbol(expr);
  if (symbol?.kind === 'function' && symbol.fn === model) return true;
  const type = flow.typeOf(expr, frame);
  if (type?.kind === 'instance' && sem.findMethod(type.cls, 'forward') === model) return true;
  const node = unwrapParens(expr);
  if (node.type === 'attribute') {
    const object = node.child('object');
    const owner = object ? flow.typeOf(object, frame) : null;
    if (owner?.kind === 'instance' && sem.findMethod(owner.cls, node.child('attribute')?.text ?? '') === model) return true;
  }
  for (const v of flow.values(expr, frame)) {
    if (v.binding?.kind === 'def' && v.binding.definition === model.node) return true;
    if (v.binding?.kind === 'import' && v.binding.qualifiedName) {
      const imported = sem.symbolOfQualifiedName(v.binding.qualifiedName, sem.workspace.analysisOfNode(v.binding.node)?.file.absPath);
      if (imported?.kind === 'function' && imported.fn === model) return true;
      continue;
    }
    if (v.node.type === 'call') {
      const callee = sem.callee(v.node);
      if (callee.symbol?.kind === 'class' && model.owner && sem.findMethod(callee.symbol.cls, 'forward') === model) return true;
      continue;
    }
    if (v.node !== node && !v.binding && refersTo(flow, v.node, v.frame, model, depth + 1)) return true;
  }
  return false;
}

/** Binds the model's parameters to the arguments of `svi.step(...)` (SVI passes them on to the model and the guide). */
function stepFrame(flow: Flow, step: SyntaxNode, model: FunctionInfo, context: Frame | null): Frame {
  const args = new Map<Binding, Arg>();
  const params = model.owner ? model.params.slice(1) : model.params;
  // From `*batch` on, each parameter receives one of the batch's tensors: it is bound to the batch itself (its rows are the batch's).
  const positional = step.child('arguments')?.namedChildren ?? [];
  const splat = positional.findIndex((a) => a.type === 'list_splat');
  const splatted = splat >= 0 ? (positional[splat]!.namedChildren[0] ?? null) : null;
  params.forEach((p, i) => {
    const keyword = flow.sem.argument(step, 99, p.name);
    const arg = keyword ?? (splat >= 0 && i >= splat ? splatted : flow.sem.argument(step, i, p.name));
    args.set(p, arg ? { node: arg, frame: context } : { node: p.value, frame: null });
  });
  return { args, depth: (context?.depth ?? 0) + 1 };
}

/** A model parameter (not self, no default) used inside the plate: the minibatch tensor whose length B is. */
export function batchTensorParameter(finding: PlateFinding): string | null {
  const body = plateBody(finding.plate);
  const params = finding.model.owner ? finding.model.params.slice(1) : finding.model.params;
  for (const p of params) {
    if (p.value) continue;
    if (!body) return p.name;
    for (const n of body.subtree()) if (n.type === 'identifier' && n.text === p.name) return p.name;
  }
  return null;
}
