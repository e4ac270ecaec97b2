// Optimised losses of elbo-scale-mismatch: finds what reaches `.backward()` (or an autograd / Lightning step),
// decomposes it into data and KL terms, and judges the KL weight against the minibatch ELBO of SOURCES.md §1.2.
import { type SyntaxNode, unwrapParens } from '../../server/src/engine/api';
import { type Flow, type IterableInfo } from './flow';
import { findInScope } from './in-scope';
import { type Dims, evaluateDims, fullBatch, isDimensionless, over, readLiteralAs, type Reduction, relativeKlWeight, type Scale, symbol, times } from './scale';
import type { Combination, Expander, Term } from './terms';

/** Whether the optimised step sees a minibatch, the whole training set, or cannot be told. */
export type Regime = 'minibatch' | 'full' | 'unknown';

/** A judged combination of a data term and a KL term in an optimised loss. */
export interface Verdict {
  root: SyntaxNode;
  combo: Combination;
  data: Term;
  kl: Term;
  reduction: Reduction;
  /** The KL weight relative to the ELBO's, as a factor in N, B, P. */
  relative: Scale;
  /** The factor on the KL relative to the data term's factor (a hard-coded batch size read as B), for the message. */
  klRelative: Dims;
  /** False when the combination adds several KL terms with different weights (then no single rewrite fixes them). */
  uniformKl: boolean;
  /** The exponents judged (after substituting B = N for full-batch training). */
  dims: Dims;
  regime: Regime;
  loader: IterableInfo | null;
  /** N and B as found (values when they fold, with the expressions they come from). */
  n: { value: number | null; text: string | null };
  b: { value: number | null; text: string | null };
  /** The relative KL weight as a number, when N and B fold. */
  numeric: number | null;
}

/** Decision of the judge: quiet, or fire with the exponents and the number. */
export interface Judgement {
  fire: boolean;
  dims: Dims;
  numeric: number | null;
}

/**
 * Decides whether a relative KL weight is wrong: its N/B/P part must vanish (constant factors are β weights or
 * tempering); an unknown factor, or a documented constant, keeps the rule quiet; with unknown training regime the
 * weight must be wrong both for minibatch and for full-batch training.
 */
export function judge(options: { relative: Scale; regime: Regime; n: number | null; b: number | null }): Judgement {
  const { relative, regime } = options;
  const quiet = { fire: false, dims: relative.dims, numeric: null };
  if (relative.opaque) return quiet;
  const dims = regime === 'full' ? fullBatch(relative.dims) : relative.dims;
  if (isDimensionless(dims)) return { ...quiet, dims };
  if (regime === 'unknown' && isDimensionless(fullBatch(relative.dims))) return { ...quiet, dims };
  if (relative.documented) return { ...quiet, dims };
  const needsB = dims.b !== 0;
  const values = options.n !== null && (!needsB || options.b !== null) ? { n: options.n, b: options.b ?? 1 } : null;
  const dimsValue = values ? evaluateDims(dims, values) : null;
  const numeric = relative.coef !== null && dimsValue !== null ? Math.abs(relative.coef) * dimsValue : null;
  if (numeric !== null) return { fire: numeric > 2 || numeric < 0.5, dims, numeric };
  if (relative.coef !== null && Math.abs(Math.log10(Math.abs(relative.coef))) >= 2) return { ...quiet, dims };
  // A schedule (annealing weight) is judged at its final value 1.
  return { fire: true, dims, numeric: relative.coef === null ? dimsValue : null };
}

/** Expressions that reach an optimiser: `.backward()` receivers, autograd targets, Lightning training_step returns. */
function optimisedRoots(flow: Flow, absPath: string): SyntaxNode[] {
  const sem = flow.sem;
  const memo = flow.memoTable<string, SyntaxNode[]>('elbo-scale-mismatch:roots');
  const cached = memo.get(absPath);
  if (cached) return cached;
  const out: SyntaxNode[] = [];
  memo.set(absPath, out);
  const analysis = sem.workspace.analysis(absPath);
  if (!analysis) return out;
  for (const node of analysis.syntax.nodes) {
    if (node.type === 'call') {
      const callee = sem.callee(node);
      const first = sem.argument(node, 0);
      if (callee.method === 'backward' && callee.receiver) {
        const receiver = unwrapParens(callee.receiver);
        const receiverType = flow.typeOf(receiver, null);
        const runner = receiverType?.kind === 'external' && /accelerate|lightning|fabric/i.test(receiverType.qualifiedName);
        if (runner && first) out.push(first);
        else if (receiver.type === 'call' && sem.callee(receiver).method === 'scale' && sem.argument(receiver, 0)) out.push(sem.argument(receiver, 0)!);
        else out.push(receiver);
      } else if (callee.method === 'manual_backward' && first) out.push(first);
      else if ((callee.qualifiedName === 'torch.autograd.grad' || callee.qualifiedName === 'torch.autograd.backward') && first) out.push(first);
    }
    if (node.type === 'function_definition') {
      const fn = analysis.module.functionByNode.get(node.id);
      if (fn?.owner && fn.name === 'training_step' && flow.isLightningModule(fn.owner)) {
        for (const r of fn.returns) {
          const value = unwrapParens(r);
          if (value.type === 'dictionary') {
            for (const pair of value.namedChildren) {
              if (pair.type === 'pair' && sem.fold(pair.child('key')!) === 'loss' && pair.child('value')) out.push(pair.child('value')!);
            }
          } else out.push(value);
        }
      }
    }
  }
  return out;
}

/**
 * Judges one optimised loss: one verdict per (combination, KL term) whose weight is off. Remembered per root: a loss
 * is judged again for every file whose terms it may hold (each file of the program it belongs to asks).
 */
function verdictsOfRoot(flow: Flow, expander: Expander, root: SyntaxNode): Verdict[] {
  const memo = flow.memoTable<SyntaxNode, Verdict[]>('elbo-scale-mismatch:verdicts');
  const cached = memo.get(root);
  if (cached) return cached;
  const out = judgeRoot(flow, expander, root);
  memo.set(root, out);
  return out;
}

function judgeRoot(flow: Flow, expander: Expander, root: SyntaxNode): Verdict[] {
  const expansion = expander.expand(root, null);
  const out: Verdict[] = [];
  for (const combo of expansion.combos) {
    const data = combo.data.filter((t) => t.reduction !== null);
    const kls = combo.kl.filter((t) => t.reduction !== null);
    if (data.length === 0 || kls.length === 0) continue;
    out.push(...judgeCombination(flow, root, combo, data, kls));
  }
  return out;
}

function judgeCombination(flow: Flow, root: SyntaxNode, combo: Combination, data: Term[], kls: Term[]): Verdict[] {
  // Data terms must agree on their weight (several likelihood terms of one model share the reduction).
  const d = data[0]!;
  const dataWeight = (t: Term) => (t.reduction === 'mean' ? over(t.scale, bSymbol()) : t.scale);
  for (const other of data.slice(1)) {
    const a = dataWeight(d).dims;
    const b = dataWeight(other).dims;
    if (a.n !== b.n || a.b !== b.b || a.p !== b.p || dataWeight(other).opaque) return [];
  }
  if (dataWeight(d).opaque) return [];
  const loader = findLoader(flow, d, root);
  const regime = regimeOf(flow, data, root, loader);
  const out: Verdict[] = [];
  const seen = new Set<string>();
  const weightKey = (k: Term) => `${k.reduction}:${k.scale.dims.n}:${k.scale.dims.b}:${k.scale.coef}:${k.scale.opaque}`;
  const weights = new Set(kls.map(weightKey));
  // The same KL reaching this `+` with different weights comes from alternative definitions (branches): it is
  // judged wrong only when it is wrong along every one of them.
  const quietCores = new Set<SyntaxNode>();
  const firing: { kl: Term; verdict: Verdict }[] = [];
  // N for the numbers: the loader's dataset when it folds; else an expression in scope, which must be read off this
  // loader's data (not a name alone) when the loader is known, since a name may count some other data.
  const knownLoader = loader !== null && flow.loaderSources(loader).length > 0;
  const found = findInScope(flow, combo.node, 'N', loader);
  const inScopeN = found && (!knownLoader || found.strong) ? found.value : null;
  for (const kl of kls) {
    const loaderN = loader ? flow.loaderDatasetLength(loader) : null;
    const literalRead = readLiteralAs(over(kl.scale, d.scale), { n: loaderN, b: loader?.batchSize ?? null });
    const klWeight = times(literalRead, d.scale);
    const klScale = kl.reduction === 'mean' ? over(klWeight, symbol({ symbol: 'P', text: 'P', value: null, strong: true })) : klWeight;
    const relative = relativeKlWeight({ data: d.scale, reduction: d.reduction!, kl: klScale });
    const n = quantity(relative, 'N', loaderN ?? inScopeN ?? null, null);
    const b = quantity(relative, 'B', loader?.batchSize ?? null, loader?.batchSizeText ?? null);
    const judgement = judge({ relative, regime, n: n.value, b: b.value });
    if (!judgement.fire) {
      quietCores.add(kl.core);
      continue;
    }
    firing.push({ kl, verdict: { root, combo, data: d, kl, reduction: d.reduction!, relative, klRelative: literalRead.dims, uniformKl: weights.size === 1, dims: judgement.dims, regime, loader, n, b, numeric: judgement.numeric } });
  }
  for (const { kl, verdict } of firing) {
    if (quietCores.has(kl.core) && kls.some((other) => other.core === kl.core && weightKey(other) !== weightKey(kl))) continue;
    // Several KL terms with the same weight (one per layer) make one finding.
    const key = `${verdict.dims.n}:${verdict.dims.b}:${verdict.dims.p}:${verdict.relative.coef}`;
    if (seen.has(key)) continue;
    seen.add(key);
    out.push(verdict);
  }
  return out;
}

function bSymbol(): Scale {
  return symbol({ symbol: 'B', text: 'B', value: null, strong: true });
}

/** N or B as found in the factors (the first with a value), else from the loader. */
function quantity(relative: Scale, name: 'N' | 'B', fallback: number | null, fallbackText: string | null): { value: number | null; text: string | null } {
  const uses = relative.symbols.filter((s) => s.symbol === name);
  const withValue = uses.find((u) => u.value !== null);
  if (withValue) return { value: withValue.value, text: withValue.text };
  return { value: fallback, text: uses[0]?.text ?? fallbackText };
}

/** The loader that feeds the data term: from its input tensors, else from a loop around the optimised root. */
function findLoader(flow: Flow, data: Term, root: SyntaxNode): IterableInfo | null {
  for (const input of data.inputs) {
    const kind = flow.tensorKind(input.node, input.frame);
    if (kind.kind === 'batch' && kind.loader) return kind.loader;
  }
  for (let n = root.parent; n; n = n.parent) {
    if (n.type === 'function_definition') break;
    if (n.type === 'for_statement') {
      const iterable = n.child('right');
      if (!iterable) continue;
      const info = flow.iterable(iterable, null);
      if (info.kind === 'loader' || info.kind === 'index-batches' || info.kind === 'index-starts') return info;
    }
  }
  return null;
}

/** Minibatch when the data comes from a loader / batch index (or a Lightning batch); full batch when it is a full array. */
function regimeOf(flow: Flow, data: Term[], root: SyntaxNode, loader: IterableInfo | null): Regime {
  let full = false;
  for (const t of data) {
    for (const input of t.inputs) {
      const kind = flow.tensorKind(input.node, input.frame);
      if (kind.kind === 'batch') return 'minibatch';
      if (kind.kind === 'full') full = true;
    }
  }
  if (loader) return 'minibatch';
  if (full) return 'full';
  // The data term reads tensors that are neither: inside a loop over a counter with no loader, full batch is possible.
  for (let n = root.parent; n; n = n.parent) if (n.type === 'for_statement' || n.type === 'while_statement') return 'unknown';
  return 'unknown';
}

/** Every verdict whose combination lies in a given file, from the optimised roots of that file and of the files importing it. */
export function verdictsForFile(flow: Flow, expander: Expander, absPath: string): Verdict[] {
  const sem = flow.sem;
  const out: Verdict[] = [];
  const seen = new Set<string>();
  for (const file of [...sem.workspace.dependentsOf(absPath)].sort()) {
    for (const root of optimisedRoots(flow, file)) {
      for (const v of verdictsOfRoot(flow, expander, root)) {
        const owner = sem.workspace.analysisOfNode(v.combo.node);
        if (!owner || owner.file.absPath !== absPath) continue;
        // A file analysed again after the workspace evicted it has new nodes for the same text (same preorder ids).
        const node = v.combo.node.file === sem.analysis.syntax ? v.combo.node : sem.analysis.syntax.nodes[v.combo.node.id];
        if (!node || node.type !== v.combo.node.type || node.start !== v.combo.node.start || node.end !== v.combo.node.end) continue;
        const key = `${node.start}:${node.end}:${v.dims.n}:${v.dims.b}:${v.dims.p}`;
        if (seen.has(key)) continue;
        seen.add(key);
        out.push(node === v.combo.node ? v : { ...v, combo: { ...v.combo, node } });
      }
    }
  }
  return out;
}
