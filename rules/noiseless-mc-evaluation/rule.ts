// noiseless-mc-evaluation: a Monte Carlo prediction loop whose passes are all identical, because the model is in
// eval mode and all its randomness is dropout that eval mode switches off (or, in JAX, one PRNG key is reused for
// every pass, or Flax dropout is made deterministic).
import { type ClassInfo, defineRule, type Figure, type Fix, formatNumber, type RuleContext, type Semantics, type SyntaxNode, type TextEdit, unwrapParens } from '../../server/src/engine/api';
import { type Mode, ModeFlow } from './mode-flow';
import { bodyNodes, classRandomness, moduleRandomness, type Randomness } from './randomness';

/** A loop that repeats its body: how often (when it folds) and where its per-pass bindings are. */
interface Repetition {
  /** The for statement or the comprehension. */
  loop: SyntaxNode;
  /** The region whose nodes run once per pass (the for body, or the comprehension's element expression). */
  body: SyntaxNode;
  count: number | null;
  /** The range bound when it does not fold (a parameter may fold at every call site). */
  countExpr: SyntaxNode | null;
  /** The loop target (for the JAX fix). */
  target: SyntaxNode | null;
}

const SAMPLING_WRAPPERS = new Set(['tqdm.tqdm', 'tqdm.auto.tqdm', 'tqdm.notebook.tqdm', 'builtins.enumerate', 'builtins.list', 'builtins.iter']);
const RANDOM_INPUT_CALLS = new Set(['torch.randn', 'torch.randn_like', 'torch.rand', 'torch.rand_like', 'torch.normal', 'torch.bernoulli']);
const JAX_SAMPLERS = new Set(['normal', 'uniform', 'bernoulli', 'categorical', 'truncated_normal', 'gumbel', 'choice', 'permutation', 'randint', 'laplace', 'multivariate_normal']);
const COLLECTING_METHODS = new Set(['append', 'extend', 'add', 'insert', 'put', 'update', 'append_']);

/** The rule: MC prediction loops whose samples are all identical. */
export const rule = defineRule({
  meta: {
    id: 'noiseless-mc-evaluation',
    title: 'Monte Carlo prediction loop whose samples are all identical',
    family: 'mc-dropout',
    defaultSeverity: 'warning',
    status: { stage: 'experimental', since: '0.1.0' },
    fix: 'sometimes',
    messages: {
      'eval-mode':
        '`{model}` is in eval mode here ({where}) and its only randomness is {layers}, which eval mode switches off: {passes} of this loop are identical, so their mean is one deterministic prediction and their spread (std, variance, disagreement) is exactly zero. Switch only the dropout layers back to train mode before the loop; normalisation layers stay in eval mode.',
      'reused-key':
        'The same PRNG key `{key}` is passed to {passes} of this loop: a JAX key is not advanced by using it, so every pass draws the same random numbers (the same dropout masks, the same noise), the samples are identical and their spread is exactly zero. Give each pass its own key (`jax.random.split` or `jax.random.fold_in`).',
      'deterministic-dropout':
        '`deterministic=True` turns Flax dropout off, and dropout is the only randomness of `{model}`: {passes} of this loop are identical and their spread is exactly zero. Pass `deterministic=False` with a fresh `dropout` key for each pass.',
    },
    settings: [],
  },
  create(context) {
    const sem = context.sem;
    const flow = new ModeFlow(sem);
    const reported = new Set<SyntaxNode>();

    function checkLoop(loop: SyntaxNode): void {
      const found = repetitionOf(sem, loop);
      const repetition = found ? resolveCount(sem, flow, found) : null;
      if (!repetition) return;
      for (const call of passCalls(repetition.body)) {
        if (reported.has(call)) continue;
        if (checkTorchPass(call, repetition) || checkJaxPass(call, repetition)) reported.add(call);
      }
    }

    /** A call of a PyTorch model on a loop-invariant input, collected across passes, in eval mode with only dropout randomness. */
    function checkTorchPass(call: SyntaxNode, repetition: Repetition): boolean {
      const model = modelOfCall(sem, call);
      if (!model) return false;
      if (!isInvariant(sem, call, repetition.loop) || drawsRandomInput(sem, call)) return false;
      if (!isCollected(sem, call, repetition)) return false;
      if (changesBetweenPasses(sem, flow, model, call, repetition)) return false;
      const mode = flow.resolvedModeAt(model, call);
      if (mode.kind !== 'eval') return false;
      const randomness = randomnessOf(sem, flow, model, 0);
      if (!randomness || randomness.modeDependent.length === 0 || randomness.modeIndependent.length > 0 || randomness.unknown.length > 0) return false;
      const figures = passFigures(repetition);
      const related = [];
      if (mode.at) related.push(context.related(mode.at, 'the model is put in eval mode here'));
      const first = randomness.modeDependent[0]!;
      related.push(context.related(first.node, 'its randomness comes from here, switched off in eval mode'));
      context.report({
        node: call,
        messageId: 'eval-mode',
        data: { model: unwrapParens(model).text, where: whereText(sem, mode, call), layers: layersText(randomness), passes: passesText(repetition) },
        figures,
        fixes: enableDropoutFix(context, model, repetition, randomness, mode),
        related,
      });
      return true;
    }

    /** JAX: one PRNG key reused by every pass, or Flax dropout made deterministic inside a sampling loop. */
    function checkJaxPass(call: SyntaxNode, repetition: Repetition): boolean {
      if (!isCollected(sem, call, repetition)) return false;
      for (const key of jaxKeys(sem, call)) {
        if (!isInvariantExpr(sem, key, repetition.loop)) continue;
        context.report({
          node: key,
          messageId: 'reused-key',
          data: { key: key.text, passes: passesText(repetition) },
          figures: passFigures(repetition),
          fixes: foldInFix(context, key, repetition),
        });
        return true;
      }
      const deterministic = flaxDeterministic(sem, call);
      if (deterministic && isInvariant(sem, call, repetition.loop, ['rngs'])) {
        context.report({
          node: deterministic.flag,
          messageId: 'deterministic-dropout',
          data: { model: deterministic.cls.name, passes: passesText(repetition) },
          figures: passFigures(repetition),
        });
        return true;
      }
      return false;
    }

    return {
      for_statement: checkLoop,
      list_comprehension: checkLoop,
      generator_expression: checkLoop,
      set_comprehension: checkLoop,
      dictionary_comprehension: checkLoop,
    };
  },
});

/**
 * A loop that repeats the same work: `for _ in range(T)` (also through tqdm, enumerate, list), or a loop whose
 * target is never used in its body. Loops over data, ensembles or submodules use their target and are not repeats.
 */
function repetitionOf(sem: Semantics, loop: SyntaxNode): Repetition | null {
  let left: SyntaxNode | null;
  let right: SyntaxNode | null;
  let body: SyntaxNode | null;
  if (loop.type === 'for_statement') {
    left = loop.child('left');
    right = loop.child('right');
    body = loop.child('body');
  } else {
    const clauses = loop.children.filter((c) => c.type === 'for_in_clause');
    if (clauses.length !== 1) return null;
    left = clauses[0]!.child('left');
    right = clauses[0]!.child('right');
    body = loop.child('body');
  }
  if (!left || !right || !body) return null;
  const count = rangeCount(sem, right);
  if (count === undefined) {
    // Not a range: only a loop that ignores its target repeats the same pass.
    if (targetUsed(sem, left, loop)) return null;
    return { loop, body, count: null, countExpr: null, target: left };
  }
  if (count !== null && count < 2) return null;
  return { loop, body, count, countExpr: count === null ? rangeBound(sem, right) : null, target: left };
}

/** The number of iterations of a range-like iterable: a number when it folds, null when not, undefined when not a range. */
function rangeCount(sem: Semantics, iterable: SyntaxNode, depth = 0): number | null | undefined {
  const n = unwrapParens(iterable);
  if (n.type !== 'call' || depth > 3) return undefined;
  const q = sem.callee(n).qualifiedName;
  if (q === 'builtins.range' || q === 'tqdm.trange' || q === 'tqdm.auto.trange') {
    const args = (n.child('arguments')?.namedChildren ?? []).filter((a) => a.type !== 'keyword_argument');
    const values = args.map((a) => sem.fold(a));
    if (args.length === 1) return typeof values[0] === 'number' ? values[0] : null;
    if (args.length >= 2) {
      const [a, b] = values;
      const step = args.length === 3 ? values[2] : 1;
      if (typeof a === 'number' && typeof b === 'number' && typeof step === 'number' && step > 0) return Math.max(0, Math.ceil((b - a) / step));
      return null;
    }
    return undefined;
  }
  if (q && SAMPLING_WRAPPERS.has(q)) {
    const inner = sem.argument(n, 0);
    return inner ? rangeCount(sem, inner, depth + 1) : undefined;
  }
  return undefined;
}

/** The single bound of `range(T)` (through wrappers), for folding at call sites. */
function rangeBound(sem: Semantics, iterable: SyntaxNode, depth = 0): SyntaxNode | null {
  const n = unwrapParens(iterable);
  if (n.type !== 'call' || depth > 3) return null;
  const q = sem.callee(n).qualifiedName;
  const args = (n.child('arguments')?.namedChildren ?? []).filter((a) => a.type !== 'keyword_argument');
  if (q === 'builtins.range' || q === 'tqdm.trange' || q === 'tqdm.auto.trange') return args.length === 1 ? args[0]! : null;
  if (q && SAMPLING_WRAPPERS.has(q) && args[0]) return rangeBound(sem, args[0], depth + 1);
  return null;
}

/**
 * The number of passes when the range bound is a parameter of the enclosing function and every call site
 * passes the same constant (or leaves it to a constant default). Loops with fewer than two passes are dropped.
 */
function resolveCount(sem: Semantics, flow: ModeFlow, repetition: Repetition): Repetition | null {
  if (repetition.count !== null || !repetition.countExpr) return repetition;
  let bound = unwrapParens(repetition.countExpr);
  // `range(self.n_samples)` with the attribute set once from a constructor parameter.
  if (bound.type === 'attribute' && bound.child('object') && sem.isSelf(unwrapParens(bound.child('object')!))) {
    const cls = sem.selfClass(bound);
    const assigned = cls ? sem.attributeBindings(cls, bound.child('attribute')!.text) : [];
    if (assigned.length !== 1 || !assigned[0]!.value) return repetition;
    const folded = sem.fold(assigned[0]!.value);
    if (typeof folded === 'number') return folded < 2 ? null : { ...repetition, count: folded };
    bound = unwrapParens(assigned[0]!.value);
  }
  if (bound.type !== 'identifier') return repetition;
  const bindings = sem.bindings(bound);
  if (bindings.length !== 1 || bindings[0]!.kind !== 'param' || !bindings[0]!.definition) return repetition;
  const fn = sem.moduleOf(bound).functionByNode.get(bindings[0]!.definition.id);
  if (!fn) return repetition;
  const index = fn.params.findIndex((p) => p.node === bindings[0]!.node);
  const calls = flow.callersOf(fn);
  let value: number | null = null;
  for (const call of calls) {
    const arg = flow.argumentFor(call, fn, index) ?? bindings[0]!.value;
    const v = arg ? sem.fold(arg) : null;
    if (typeof v !== 'number' || (value !== null && v !== value)) return repetition;
    value = v;
  }
  if (value === null) return repetition;
  return value < 2 ? null : { ...repetition, count: value };
}

/** True when a loop target is read anywhere in the loop (other than `_`-style names never read). */
function targetUsed(sem: Semantics, left: SyntaxNode, loop: SyntaxNode): boolean {
  const names = new Set<SyntaxNode>();
  // An explicit stack: loop targets can nest deeply (`for ((((a,),),),) in …`).
  for (const stack = [left]; stack.length > 0; ) {
    const u = unwrapParens(stack.pop()!);
    if (u.type === 'identifier') names.add(u);
    else stack.push(...u.namedChildren);
  }
  for (const n of loop.type === 'for_statement' ? bodyNodes(loop.child('body')!) : bodyNodes(loop)) {
    if (n.type !== 'identifier' || names.has(n)) continue;
    if (sem.bindings(n).some((b) => names.has(b.node))) return true;
  }
  return false;
}

/** Calls inside a loop's per-pass region (not in nested functions). */
function passCalls(body: SyntaxNode): SyntaxNode[] {
  return bodyNodes(body).filter((n) => n.type === 'call');
}

/** The model a call calls: `model(x)`, `self.net(x)`, `model.forward(x)`, when it is a neural-network module. */
function modelOfCall(sem: Semantics, call: SyntaxNode): SyntaxNode | null {
  const fn = call.child('function');
  if (!fn) return null;
  let target = unwrapParens(fn);
  if (target.type === 'attribute' && target.child('attribute')?.text === 'forward' && target.child('object')) target = unwrapParens(target.child('object')!);
  if (target.type !== 'identifier' && target.type !== 'attribute') return null;
  const type = sem.typeOf(target);
  if (type?.kind === 'instance') return sem.isModuleClass(type.cls) ? target : null;
  if (type?.kind === 'external') return /^torch\.nn\.(?:modules\.\w+\.)?[A-Z]\w*$/.test(type.qualifiedName) ? target : null;
  const callee = sem.callee(call);
  if (callee.qualifiedName || callee.symbol) return null;
  // An untyped parameter: a model when its callers pass one.
  return target;
}

/** The randomness of a model expression: from its class, its constructor call, or what its callers pass. */
function randomnessOf(sem: Semantics, flow: ModeFlow, expr: SyntaxNode, depth: number): Randomness | null {
  if (depth > 6) return null;
  const type = sem.typeOf(expr);
  if (type?.kind === 'instance') return sem.isModuleClass(type.cls) ? classRandomness(sem, type.cls) : null;
  const ref = flow.objectRef(expr);
  if (!ref) return null;
  if (ref.kind === 'alloc') return moduleRandomness(sem, ref.node);
  if (ref.kind !== 'param' || !ref.fn || ref.index === undefined) return null;
  const calls = flow.callersOf(ref.fn);
  if (calls.length === 0) return null;
  const out: Randomness = { modeDependent: [], modeIndependent: [], unknown: [], dropoutClasses: new Set(), customClasses: new Set() };
  for (const call of calls) {
    const arg = flow.argumentFor(call, ref.fn, ref.index);
    const r = arg ? randomnessOf(sem, flow, arg, depth + 1) : null;
    if (!r) return null;
    out.modeDependent.push(...r.modeDependent);
    out.modeIndependent.push(...r.modeIndependent);
    out.unknown.push(...r.unknown);
    for (const c of r.dropoutClasses) out.dropoutClasses.add(c);
    for (const c of r.customClasses) out.customClasses.add(c);
  }
  return out;
}

/** True when a call's callee and arguments (except the named keywords) do not depend on anything bound inside the loop. */
function isInvariant(sem: Semantics, call: SyntaxNode, loop: SyntaxNode, skipKeywords: string[] = []): boolean {
  const fn = call.child('function');
  if (fn && !isInvariantExpr(sem, fn, loop)) return false;
  for (const a of call.child('arguments')?.namedChildren ?? []) {
    if (a.type === 'keyword_argument' && skipKeywords.includes(a.child('name')?.text ?? '')) continue;
    if (!isInvariantExpr(sem, a, loop)) return false;
  }
  return true;
}

/**
 * True when an expression has the same value in every pass of the loop: the names it reads are bound outside the
 * loop, or inside it by an inner loop over something that itself repeats (a data loader read in every pass), or
 * by an assignment whose value repeats in turn.
 */
function isInvariantExpr(sem: Semantics, expr: SyntaxNode, loop: SyntaxNode, verdicts: Map<SyntaxNode, boolean | 'pending'> = new Map()): boolean {
  for (const n of bodyNodes(expr)) {
    if (n.type !== 'identifier') continue;
    if (n.parent?.type === 'keyword_argument' && n.field === 'name') continue;
    if (n.parent?.type === 'attribute' && n.field === 'attribute') continue;
    for (const b of sem.bindings(n)) {
      if (!loop.contains(b.node)) continue;
      const known = verdicts.get(b.node);
      if (known === false) return false;
      if (known === true) continue;
      if (known === 'pending') {
        // A binding met again while it is being judged depends on itself: across passes (`key, sub = split(key)`)
        // unless an inner loop rebinds the name first in each of its iterations (`for x in loader: x = x.to(d)`).
        if (innerLoopRebinds(b.node, loop)) continue;
        return false;
      }
      verdicts.set(b.node, 'pending');
      const repeats = bindingRepeats(sem, b, loop, verdicts);
      verdicts.set(b.node, repeats);
      if (!repeats) return false;
    }
  }
  return true;
}

/** True when a binding inside the loop gets the same value in every pass. */
function bindingRepeats(sem: Semantics, b: ReturnType<Semantics['bindings']>[number], loop: SyntaxNode, verdicts: Map<SyntaxNode, boolean | 'pending'>): boolean {
  if (b.kind === 'for' || b.kind === 'comprehension') {
    const inner = b.node.closest('for_statement', 'for_in_clause');
    const iterable = inner?.child('right');
    if (!inner || inner === loop || (loop.type !== 'for_statement' && loop.children.includes(inner)) || !iterable) return false;
    return isInvariantExpr(sem, iterable, loop, verdicts);
  }
  const value = b.value ?? b.unpack?.from ?? null;
  return (b.kind === 'assign' || b.kind === 'augassign') && value !== null && !drawsRandom(sem, value) && isInvariantExpr(sem, value, loop, verdicts);
}

/** True when a name bound at `target` is also a target of an inner for loop (inside `loop`) that contains it. */
function innerLoopRebinds(target: SyntaxNode, loop: SyntaxNode): boolean {
  for (let n = target.parent; n && n !== loop; n = n.parent) {
    if (n.type !== 'for_statement') continue;
    const left = n.child('left');
    if (left && bodyNodes(left).some((x) => x.type === 'identifier' && x.text === target.text)) return true;
  }
  return false;
}

/** True when an expression draws random numbers itself (then it differs between passes). */
function drawsRandom(sem: Semantics, expr: SyntaxNode): boolean {
  return bodyNodes(expr).some((n) => n.type === 'call' && (RANDOM_INPUT_CALLS.has(sem.callee(n).qualifiedName ?? '') || sem.callee(n).method === 'normal_'));
}

/** True when the model's input is itself randomised (test-time augmentation), so passes differ anyway. */
function drawsRandomInput(sem: Semantics, call: SyntaxNode): boolean {
  const args = call.child('arguments');
  if (!args) return false;
  return bodyNodes(args).some((n) => n.type === 'call' && (RANDOM_INPUT_CALLS.has(sem.callee(n).qualifiedName ?? '') || sem.callee(n).method === 'normal_'));
}

/**
 * True when the value of a call is kept across passes: the comprehension's result is used, or inside a for loop
 * the value (directly or through local names) is appended, accumulated, stored by index, or yielded.
 */
function isCollected(sem: Semantics, call: SyntaxNode, repetition: Repetition): boolean {
  const loop = repetition.loop;
  if (loop.type !== 'for_statement') {
    let n = loop;
    while (n.parent?.type === 'parenthesized_expression') n = n.parent;
    return n.parent?.type !== 'expression_statement';
  }
  const tainted = new Set<SyntaxNode>();
  const carries = (expr: SyntaxNode | null): boolean => {
    if (!expr) return false;
    if (expr.contains(call)) return true;
    return bodyNodes(expr).some((n) => n.type === 'identifier' && sem.bindings(n).some((b) => tainted.has(b.node)));
  };
  for (const n of bodyNodes(repetition.body)) {
    if (n.type === 'assignment') {
      const right = n.child('right');
      if (!carries(right)) continue;
      const left = n.child('left');
      if (!left) continue;
      if (left.type === 'subscript' || left.type === 'attribute') return true;
      const targets = left.type === 'identifier' ? [left] : bodyNodes(left).filter((x) => x.type === 'identifier');
      for (const t of targets) {
        // `preds = torch.cat([preds, out])`: a name bound before the loop keeps the value.
        if (sem.bindings(t).some((b) => b.node !== t && !loop.contains(b.node))) return true;
        tainted.add(t);
      }
    } else if (n.type === 'augmented_assignment') {
      if (carries(n.child('right'))) return true;
    } else if (n.type === 'call') {
      const callee = sem.callee(n);
      if (callee.method && COLLECTING_METHODS.has(callee.method) && carries(n.child('arguments'))) return true;
    } else if (n.type === 'yield' && carries(n)) return true;
  }
  return false;
}

/** Methods on the model that do not change its weights or outputs between passes. */
const HARMLESS_MODEL_METHODS = new Set(['eval', 'to', 'cpu', 'cuda', 'float', 'double', 'half', 'forward', 'zero_grad', 'parameters', 'named_parameters', 'modules', 'state_dict']);
/** Calls that change trained weights (a training step inside the loop makes the passes differ). */
const WEIGHT_UPDATES = new Set(['step', 'backward', 'load_state_dict', 'train', 'apply', 'fit']);

/**
 * True when the model may change from one pass to the next: the loop body trains it (an optimiser step, a
 * backward pass, loaded weights) or hands the model to other code (a training helper), or switches its mode.
 */
function changesBetweenPasses(sem: Semantics, flow: ModeFlow, model: SyntaxNode, call: SyntaxNode, repetition: Repetition): boolean {
  const key = flow.objectRef(model)?.key;
  for (const n of bodyNodes(repetition.body)) {
    if (n.type === 'call' && n !== call) {
      const callee = sem.callee(n);
      if (callee.method && WEIGHT_UPDATES.has(callee.method)) return true;
    }
    if (!key || (n.type !== 'identifier' && n.type !== 'attribute') || call.child('function')?.contains(n) || n.parent?.type === 'attribute' && n.field === 'object' && n.parent.parent?.type !== 'call') continue;
    if (n.parent?.type === 'attribute' && n.field === 'attribute') continue;
    if (flow.objectRef(n)?.key !== key) continue;
    // A reference to the model other than the sampled call: allowed only as the receiver of a harmless method.
    const parent = n.parent;
    if (parent?.type === 'attribute' && n.field === 'object' && parent.parent?.type === 'call' && HARMLESS_MODEL_METHODS.has(parent.child('attribute')?.text ?? '')) continue;
    if (parent?.type === 'call' && n.field === 'function') continue;
    return true;
  }
  return false;
}

/** Keys passed to JAX randomness in a call: `rngs={'dropout': key}` values and the key of a `jax.random` sampler. */
function jaxKeys(sem: Semantics, call: SyntaxNode): SyntaxNode[] {
  const out: SyntaxNode[] = [];
  const rngs = sem.argument(call, 99, 'rngs');
  if (rngs) {
    const d = unwrapParens(rngs);
    if (d.type === 'dictionary') {
      for (const pair of d.namedChildren) if (pair.type === 'pair' && pair.child('value')) out.push(unwrapParens(pair.child('value')!));
    }
    const isApply = sem.callee(call).method === 'apply' || isFlaxModuleValue(sem, call.child('function'));
    return isApply ? out : [];
  }
  const q = sem.callee(call).qualifiedName;
  if (q && q.startsWith('jax.random.') && JAX_SAMPLERS.has(q.slice('jax.random.'.length))) {
    const key = sem.argument(call, 0, 'key');
    if (key) out.push(unwrapParens(key));
  }
  return out;
}

function isFlaxModuleValue(sem: Semantics, expr: SyntaxNode | null): boolean {
  if (!expr) return false;
  const type = sem.typeOf(expr);
  return type?.kind === 'instance' && sem.isSubclassOf(type.cls, ['flax.linen.Module', 'flax.nnx.Module']);
}

/** `model.apply(..., deterministic=True)` of a Flax module whose only randomness is `nn.Dropout`. */
function flaxDeterministic(sem: Semantics, call: SyntaxNode): { flag: SyntaxNode; cls: ClassInfo } | null {
  const flag = sem.argument(call, 99, 'deterministic');
  if (!flag || sem.fold(flag) !== true) return null;
  const callee = sem.callee(call);
  const receiver = callee.method === 'apply' ? callee.receiver : call.child('function');
  if (!receiver) return null;
  const type = sem.typeOf(receiver);
  if (type?.kind !== 'instance' || !sem.isSubclassOf(type.cls, ['flax.linen.Module'])) return null;
  let dropout = false;
  for (const c of sem.ancestry(type.cls)) {
    for (const n of c.node.subtree()) {
      if (n.type !== 'call') continue;
      const nc = sem.callee(n);
      if (nc.qualifiedName === 'flax.linen.Dropout') dropout = true;
      else if (nc.method === 'make_rng' || (nc.qualifiedName?.startsWith('jax.random.') && JAX_SAMPLERS.has(nc.qualifiedName.slice('jax.random.'.length)))) return null;
    }
  }
  return dropout ? { flag: unwrapParens(flag), cls: type.cls } : null;
}

function passesText(repetition: Repetition): string {
  return repetition.count !== null ? `all ${formatNumber(repetition.count)} passes` : 'all passes';
}

function passFigures(repetition: Repetition): Figure[] {
  const figures: Figure[] = [];
  if (repetition.count !== null) figures.push({ label: 'identical samples', value: repetition.count });
  figures.push({ label: 'distinct predictions among the samples', value: 1 });
  figures.push({ label: 'spread across the samples (std, variance)', value: 0 });
  return figures;
}

/** Where the model was put in eval mode, in words. */
function whereText(sem: Semantics, mode: Mode, call: SyntaxNode): string {
  const at = mode.at;
  if (!at) return 'eval mode is set before this loop';
  const what = at.type === 'call' ? `\`.${sem.callee(at).method ?? 'eval'}(${at.child('arguments')?.namedChildren.map((a) => a.text).join(', ') ?? ''})\`` : '`.training = False`';
  const atFn = sem.moduleOf(at).enclosingFunction(at);
  const callFn = sem.moduleOf(call).enclosingFunction(call);
  const sameFile = at.file === call.file;
  if (atFn === callFn && sameFile) return `${what} above`;
  const file = sameFile ? '' : ` in ${sem.workspace.analysisOfNode(at)?.file.path ?? 'another file'}`;
  if (atFn) return `${what} in \`${atFn.owner ? `${atFn.owner.name}.` : ''}${atFn.name}\`${file}`;
  return `${what} at module level${file}`;
}

function layersText(randomness: Randomness): string {
  const counts = new Map<string, number>();
  // Library dropout layers first, then the workspace layers' own noise.
  const ordered = [...randomness.modeDependent].sort((a, b) => Number(!a.what.startsWith('`nn.')) - Number(!b.what.startsWith('`nn.')));
  for (const s of ordered) counts.set(s.what, (counts.get(s.what) ?? 0) + 1);
  const parts = [...counts].map(([what, n]) => (n > 1 ? `${what} (${n}×)` : what));
  if (parts.length <= 1) return parts[0] ?? 'dropout';
  return `${parts.slice(0, -1).join(', ')} and ${parts[parts.length - 1]}`;
}

/** A module-level name in the file of `at` that refers to a workspace class. */
function localClassName(sem: Semantics, at: SyntaxNode, cls: ClassInfo): string | null {
  const module = sem.moduleOf(at);
  for (const [name, bindings] of module.moduleScope.bindings) {
    if (bindings.length !== 1) continue;
    const b = bindings[0]!;
    if (b.kind === 'class' && b.definition === cls.node) return name;
    if (b.kind === 'import' && b.qualifiedName) {
      const symbol = sem.symbolOfQualifiedName(b.qualifiedName, sem.workspace.analysisOfNode(at)?.file.absPath);
      if (symbol?.kind === 'class' && symbol.cls === cls) return name;
    }
  }
  return null;
}

/** The statement (directly in a block or the module) that holds a node. */
function statementOf(node: SyntaxNode): SyntaxNode | null {
  for (let n: SyntaxNode | null = node; n; n = n.parent) {
    if (n.parent && (n.parent.type === 'block' || n.parent.type === 'module')) return n;
  }
  return null;
}

/**
 * The fix: before the loop, a loop over the model's modules that switches only the dropout layers (and the
 * workspace layers whose own forward is dropout-like) back to train mode; BatchNorm and the rest stay in eval.
 */
function enableDropoutFix(context: RuleContext, model: SyntaxNode, repetition: Repetition, randomness: Randomness, mode: Mode): Fix[] {
  const sem = context.sem;
  const modelExpr = unwrapParens(model);
  if (!/^[A-Za-z_][\w.]*$/.test(modelExpr.text)) return [];
  // Before the loop; or, when eval mode is set inside the loop, right after that statement.
  const evalInside = mode.at && repetition.loop.contains(mode.at) ? statementOf(mode.at) : null;
  const stmt = evalInside ?? (repetition.loop.type === 'for_statement' ? repetition.loop : statementOf(repetition.loop));
  if (!stmt) return [];
  const text = stmt.file.text;
  const stmtLineStart = text.lastIndexOf('\n', stmt.start - 1) + 1;
  const indent = text.slice(stmtLineStart, stmt.start);
  if (!/^[ \t]*$/.test(indent)) return [];
  let lineStart = stmtLineStart;
  if (evalInside) {
    const lineEnd = text.indexOf('\n', stmt.end);
    if (lineEnd < 0 || evalInside.type !== 'expression_statement') return [];
    lineStart = lineEnd + 1;
  }
  const edits: TextEdit[] = [];
  let nn = sem.moduleAlias(stmt, 'torch.nn');
  if (!nn) {
    const torch = sem.moduleAlias(stmt, 'torch');
    if (torch) nn = `${torch}.nn`;
  }
  const libraryClasses = [...randomness.dropoutClasses].sort().map((q) => q.replace(/^torch\.nn\./, ''));
  if (!nn && libraryClasses.length > 0) {
    const importEnd = lastTopLevelImportEnd(stmt);
    if (importEnd === null) return [];
    edits.push(context.replaceRange(stmt, importEnd, importEnd, '\nimport torch'));
    nn = 'torch.nn';
  }
  const customNames = [...randomness.customClasses].map((c) => localClassName(sem, stmt, c)).filter((n): n is string => n !== null).sort();
  if (libraryClasses.length === 0 && customNames.length === 0) return [];
  const scopeNames = (name: string) => sem.moduleOf(stmt).lookup(name, stmt).length > 0;
  const variable = ['module', 'submodule', 'mc_module'].find((n) => !scopeNames(n)) ?? 'mc_module_';
  const tuple = (names: string[]) => (names.length === 1 ? names[0]! : `(${names.join(', ')})`);
  const lines = [`${indent}for ${variable} in ${modelExpr.text}.modules():`];
  if (libraryClasses.length > 0) {
    lines.push(`${indent}    if isinstance(${variable}, ${tuple(libraryClasses.map((c) => `${nn}.${c}`))}):`, `${indent}        ${variable}.train()`);
  }
  if (customNames.length > 0) {
    // Workspace layers may hold normalisation submodules: set only their own flag, without recursing.
    lines.push(`${indent}    ${libraryClasses.length > 0 ? 'elif' : 'if'} isinstance(${variable}, ${tuple(customNames)}):`, `${indent}        ${variable}.training = True`);
  }
  edits.push(context.replaceRange(stmt, lineStart, lineStart, `${lines.join('\n')}\n`));
  return [{ title: `Switch only the dropout layers of \`${modelExpr.text}\` back to train mode before the loop`, safety: 'review', edits }];
}

/** The end offset of the last top-level import statement of the file holding a node, or null when there is none. */
function lastTopLevelImportEnd(at: SyntaxNode): number | null {
  let end: number | null = null;
  for (const s of at.file.root.namedChildren) if (s.type === 'import_statement' || s.type === 'import_from_statement') end = s.end;
  return end;
}

/** The JAX fix: derive the key of each pass from the reused key and the pass index with `jax.random.fold_in`. */
function foldInFix(context: RuleContext, key: SyntaxNode, repetition: Repetition): Fix[] {
  const sem = context.sem;
  const target = repetition.target ? unwrapParens(repetition.target) : null;
  if (!target || target.type !== 'identifier') return [];
  let random = sem.moduleAlias(key, 'jax.random');
  if (!random) {
    const jax = sem.moduleAlias(key, 'jax');
    if (jax) random = `${jax}.random`;
  }
  if (!random) return [];
  const edits: TextEdit[] = [];
  let index = target.text;
  if (index === '_') {
    if (targetUsedElsewhere(sem, target, repetition)) return [];
    index = ['sample_index', 'pass_index'].find((n) => sem.moduleOf(key).lookup(n, key).length === 0) ?? 'sample_index_';
    edits.push(context.replace(target, index));
  }
  edits.push(context.replace(key, `${random}.fold_in(${key.text}, ${index})`));
  return [{ title: `Give each pass its own key: \`${random}.fold_in(${key.text}, ${index})\``, safety: 'review', edits }];
}

/** True when a `_` target is read in the loop (then it cannot be renamed safely). */
function targetUsedElsewhere(sem: Semantics, target: SyntaxNode, repetition: Repetition): boolean {
  return bodyNodes(repetition.body).some((n) => n.type === 'identifier' && n.text === '_' && sem.bindings(n).some((b) => b.node === target));
}
