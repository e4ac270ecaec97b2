// Finds, at a place in the code, an expression that holds the dataset size N, the batch count K or the batch
// size B (a visible name whose value means it, the loop's loader, a `self` attribute), for the fixes' rewrites.
import { type Binding, type SyntaxNode, unwrapParens } from '../../server/src/engine/api';
import type { Flow, IterableInfo, Value } from './flow';
import { isDimensionless, OPAQUE, type Scale } from './scale';

/** An expression usable at a place, and whether its meaning comes from data flow (strong) or from a name only. */
export interface ScopeExpression {
  text: string;
  strong: boolean;
  value: number | null;
}

type Wanted = 'N' | 'K' | 'B';

const DIMS: Record<Wanted, { n: number; b: number }> = { N: { n: 1, b: 0 }, K: { n: 1, b: -1 }, B: { n: 0, b: 1 } };

/** The meaning of one binding's value (parameters through their call sites, literals bound to known names). */
function bindingScale(flow: Flow, b: Binding): Scale {
  if (b.kind === 'param') {
    if (flow.isSelfBinding(b)) return OPAQUE;
    const args = flow.paramArgs(b, null);
    const scales = args.map((a) => (a.node ? flow.scaleOf(a.node, a.frame) : OPAQUE));
    const named = flow.nameMeaning(b.name);
    if (scales.length > 0 && scales.every((s) => !s.opaque && s.dims.n === scales[0]!.dims.n && s.dims.b === scales[0]!.dims.b)) {
      const s = scales[0]!;
      if (isDimensionless(s.dims) && named && s.coef !== null) return { ...s, dims: { ...DIMS[named], p: 0 }, coef: 1, symbols: [{ symbol: named, text: b.name, value: s.coef, strong: false }] };
      return s;
    }
    return named ? { ...OPAQUE, opaque: false, coef: 1, dims: { ...DIMS[named], p: 0 }, symbols: [{ symbol: named, text: b.name, value: null, strong: false }] } : OPAQUE;
  }
  if ((b.kind === 'assign' || b.kind === 'walrus') && b.value && !b.unpack) {
    const s = flow.scaleOf(b.value, null);
    const named = flow.nameMeaning(b.name);
    if (!s.opaque && s.symbols.length === 0 && s.coef !== null && named) return { ...s, dims: { ...DIMS[named], p: 0 }, coef: 1, symbols: [{ symbol: named, text: b.name, value: s.coef, strong: false }] };
    if (s.opaque && named) return { ...OPAQUE, opaque: false, coef: 1, dims: { ...DIMS[named], p: 0 }, symbols: [{ symbol: named, text: b.name, value: null, strong: false }] };
    return s;
  }
  const named = flow.nameMeaning(b.name);
  return named ? { ...OPAQUE, opaque: false, coef: 1, dims: { ...DIMS[named], p: 0 }, symbols: [{ symbol: named, text: b.name, value: null, strong: false }] } : OPAQUE;
}

function means(s: Scale, wanted: Wanted): boolean {
  const d = DIMS[wanted];
  return !s.opaque && s.dims.n === d.n && s.dims.b === d.b && s.dims.p === 0 && (s.coef === 1 || s.coef === null) && !s.schedule;
}

/** Names visible at a node, innermost scope first, with the bindings that reach it. */
function visibleBindings(flow: Flow, at: SyntaxNode): { name: string; bindings: Binding[] }[] {
  const module = flow.sem.moduleOf(at);
  const out: { name: string; bindings: Binding[] }[] = [];
  const seen = new Set<string>();
  const useScope = module.scopeOf(at);
  let first = true;
  for (let scope: typeof useScope | null = useScope; scope; scope = scope.parent) {
    if (!first && scope.kind === 'class') continue;
    first = false;
    for (const name of scope.bindings.keys()) {
      if (seen.has(name)) continue;
      seen.add(name);
      // Only names bound before this point: a module-level name assigned further down may not exist yet when this runs.
      const bindings = module.lookup(name, at).filter((b) => (b.kind === 'param' && b.scope === useScope) || b.node.start < at.start);
      if (bindings.length > 0) out.push({ name, bindings });
    }
  }
  return out;
}

/** An expression for N, K or B that can be written at a node (remembered per node, quantity and loader). */
export function findInScope(flow: Flow, at: SyntaxNode, wanted: Wanted, loader: IterableInfo | null): ScopeExpression | null {
  const memo = flow.memoTable<SyntaxNode, Map<string, Map<SyntaxNode | null, ScopeExpression | null>>>('elbo-scale-mismatch:in-scope');
  let byWanted = memo.get(at);
  if (!byWanted) memo.set(at, (byWanted = new Map()));
  let byLoader = byWanted.get(wanted);
  if (!byLoader) byWanted.set(wanted, (byLoader = new Map()));
  const key = loader?.kind === 'loader' && loader.source ? loader.source.node : null;
  if (byLoader.has(key)) return byLoader.get(key)!;
  const result = findInScopeUncached(flow, at, wanted, loader);
  byLoader.set(key, result);
  return result;
}

function findInScopeUncached(flow: Flow, at: SyntaxNode, wanted: Wanted, loader: IterableInfo | null): ScopeExpression | null {
  let weak: ScopeExpression | null = null;
  const visible = visibleBindings(flow, at);
  const useScope = flow.sem.moduleOf(at).scopeOf(at);
  const local = visible.filter((v) => v.bindings.every((b) => b.scope === useScope));
  const outer = visible.filter((v) => !local.includes(v));
  const fromSelf = selfAttribute(flow, at, wanted);
  // With a known loader, a quantity read off other data (another loader or dataset) is not this loop's N or K.
  const ours = loader ? new Set(flow.loaderSources(loader)) : null;
  const otherData = (s: Scale) => ours !== null && ours.size > 0 && s.symbols.some((u) => u.sources && !u.sources.some((x) => ours.has(x as SyntaxNode)));
  for (const { name, bindings } of [...local, ...(fromSelf?.strong ? [] : outer)]) {
    if (bindings.length !== 1) continue;
    const b = bindings[0]!;
    if (b.kind === 'def' || b.kind === 'class' || b.kind === 'import') continue;
    const s = bindingScale(flow, b);
    if (!means(s, wanted) || otherData(s)) continue;
    const strong = s.symbols.length > 0 && s.symbols.every((u) => u.strong);
    const value = s.symbols.find((u) => u.value !== null)?.value ?? null;
    if (strong) return { text: name, strong, value };
    weak ??= { text: name, strong: false, value };
  }
  // The loader that feeds the loop, when it is visible here by name.
  if (loader?.kind === 'loader' && loader.source && wanted !== 'B') {
    const name = visibleNameOf(flow, at, loader.source) ?? selfAttributeHolding(flow, at, loader.source);
    if (name) return { text: wanted === 'N' ? `len(${name}.dataset)` : `len(${name})`, strong: true, value: null };
  }
  if (fromSelf?.strong) return fromSelf;
  return weak ?? fromSelf;
}

/** In a method: an attribute of self that means the wanted quantity (`self.n_train = len(loader.dataset)`). */
function selfAttribute(flow: Flow, at: SyntaxNode, wanted: Wanted): ScopeExpression | null {
  const fn = flow.sem.moduleOf(at).enclosingFunction(at);
  const self = fn?.owner ? fn.params[0] : undefined;
  if (!fn?.owner || !self || !flow.isSelfBinding(self)) return null;
  let weak: ScopeExpression | null = null;
  for (const [attr, list] of fn.owner.attributes) {
    const values = list.map((a) => a.value).filter((v): v is SyntaxNode => !!v);
    if (values.length !== 1) continue;
    const s = flow.scaleOf(values[0]!, null);
    const named = flow.nameMeaning(attr);
    const ok = means(s, wanted) || (named === wanted && (s.opaque || s.symbols.length === 0));
    if (!ok) continue;
    const strong = means(s, wanted) && s.symbols.every((u) => u.strong) && s.symbols.length > 0;
    if (strong) return { text: `${self.name}.${attr}`, strong, value: null };
    weak ??= { text: `${self.name}.${attr}`, strong: false, value: null };
  }
  return weak;
}

/** A name visible at a node whose value is the given expression (e.g. the loader a loop iterates). */
function visibleNameOf(flow: Flow, at: SyntaxNode, target: Value): string | null {
  for (const { name, bindings } of visibleBindings(flow, at)) {
    for (const b of bindings) {
      const values = b.value && (b.kind === 'assign' || b.kind === 'walrus') && !b.unpack ? flow.values(b.value, null) : b.kind === 'param' ? flow.paramArgs(b, null).flatMap((a) => (a.node ? flow.values(a.node, a.frame) : [])) : [];
      if (values.some((v) => v.node === target.node)) return name;
    }
  }
  return null;
}

/** In a method: `self.<attribute>` when the attribute holds the given value (the loader a trainer keeps). */
function selfAttributeHolding(flow: Flow, at: SyntaxNode, target: Value): string | null {
  const fn = flow.sem.moduleOf(at).enclosingFunction(at);
  const self = fn?.owner ? fn.params[0] : undefined;
  if (!fn?.owner || !self || !flow.isSelfBinding(self)) return null;
  for (const [attr, list] of fn.owner.attributes) {
    if (list.length !== 1 || !list[0]!.value) continue;
    if (flow.values(list[0]!.value, null).some((v) => v.node === target.node)) return `${self.name}.${attr}`;
  }
  return null;
}

/** `<tensor>.shape[0]` for a minibatch tensor of the data term visible at a node. */
export function batchSizeExpression(flow: Flow, at: SyntaxNode, inputs: Value[]): ScopeExpression | null {
  const module = flow.sem.moduleOf(at);
  // The target comes last among a loss's inputs and is the plainest minibatch tensor.
  for (const input of [...inputs].reverse()) {
    const node = unwrapParens(input.node);
    if (node.type !== 'identifier' || input.frame !== null) continue;
    if (flow.tensorKind(node, null).kind !== 'batch') continue;
    const here = module.lookup(node.text, at);
    const there = flow.sem.bindings(node);
    if (here.length > 0 && here.every((b) => there.includes(b))) return { text: `${node.text}.shape[0]`, strong: true, value: null };
  }
  return findInScope(flow, at, 'B', null);
}

/** True when an expression must be parenthesised before `/ x` or `* x` is appended to it. */
export function needsParens(node: SyntaxNode): boolean {
  const n = node;
  if (n.type === 'binary_operator') return ['+', '-', '<<', '>>', '&', '|', '^', '@'].includes(n.child('operator')?.text ?? '');
  return ['boolean_operator', 'comparison_operator', 'not_operator', 'conditional_expression', 'lambda', 'named_expression'].includes(n.type);
}

/** An expression text, parenthesised when it is not a single primary (name, call, attribute, subscript, number). */
export function asFactor(text: string): string {
  return /^[\w.]+(\([^()]*(\([^()]*\))*[^()]*\))?(\.[\w]+)*(\[[^\]]*\])?$/.test(text) ? text : `(${text})`;
}
