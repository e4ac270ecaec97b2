// unbounded-noise-rate, the fixes: clamp the trainable rate where it is read, and the additive reparameterisation.
import { type ClassInfo, type Fix, type RuleContext, type Semantics, type SyntaxNode, type TextEdit, unwrapParens } from '../../server/src/engine/api';
import { invertOp, type Leaf, type NoiseSite, type Op, walk } from './rate-walk';

/** A number as a Python float literal. */
function floatLiteral(value: number): string {
  const text = String(Number(value.toPrecision(10)));
  return /[.eE]/.test(text) || /inf|nan/i.test(text) ? text : `${text}.0`;
}

/** The two fixes: clamp the trainable tensor where it is read; the additive reparameterisation where the layer allows it. */
export function fixesFor(context: RuleContext, site: NoiseSite, leaf: Leaf): Fix[] {
  const trainable = leaf.trainable;
  if (!trainable || trainable.framework !== 'torch' || !leaf.read) return [];
  const fixes: Fix[] = [];
  const clamp = clampFix(context, leaf);
  if (clamp) fixes.push(clamp);
  const additive = additiveFix(context, site, leaf);
  if (additive) fixes.push(additive);
  return fixes;
}

/** The bound on the trainable tensor (inside any existing clamp) at which α = 1, or null when it cannot be inverted. */
function boundForAlphaOne(ops: Op[], upTo: number): number | null {
  // α = 1 means s = 1 for a standard deviation (α = s²) and a factor of 1 for a variance: both invert from 1.
  let y = 1;
  for (let i = ops.length - 1; i >= upTo; i--) y = invertOp(ops[i]!, y);
  return Number.isFinite(y) ? y : null;
}

function clampFix(context: RuleContext, leaf: Leaf): Fix | null {
  const clamps = leaf.ops.map((op, i) => ({ op, i })).filter((x) => x.op.kind === 'clamp');
  const existing = clamps.length === 1 ? clamps[0]! : null;
  if (existing && existing.op.kind === 'clamp' && existing.op.maxNode) {
    // Tighten the existing bound: the value it clamps must map to α = 1.
    const bound = boundForAlphaOne(leaf.ops, existing.i + 1);
    if (bound === null) return null;
    return { title: `Lower the clamp's upper bound to ${floatLiteral(bound)} (α ≤ 1)`, safety: 'review', edits: [context.replace(existing.op.maxNode, floatLiteral(bound))] };
  }
  if (clamps.length > 0) return null;
  const bound = boundForAlphaOne(leaf.ops, 0);
  if (bound === null || !leaf.read) return null;
  const read = leaf.read;
  const text = `${read.text}.clamp(max=${floatLiteral(bound)})`;
  const isLog = bound === 0;
  return { title: isLog ? `Clamp \`${read.text}\` at 0 where it is read (log α ≤ 0, α ≤ 1)` : `Clamp \`${read.text}\` at ${floatLiteral(bound)} where it is read (α ≤ 1)`, safety: 'review', edits: [context.replace(read, text)] };
}

/**
 * The additive reparameterisation (Molchanov et al. 2017): store log σ² instead of log α (or α), derive log α from
 * it in a property of the same name (so KL and pruning code keep working), and make the noise additive,
 * `θ + exp(½·log σ²)·ε`. Offered only for a layer whose noisy value is one of its own weight parameters, whose
 * rate is log α (or α) with no other steps, and whose rate parameter is only read.
 */
function additiveFix(context: RuleContext, site: NoiseSite, leaf: Leaf): Fix | null {
  const sem = context.sem;
  const trainable = leaf.trainable!;
  if (!trainable.attribute || !site.rewrite || !site.signal || !trainable.init) return null;
  const shape = leaf.ops.map((o) => (o.kind === 'scale' ? `scale:${o.c}` : o.kind === 'pow' ? `pow:${o.k}` : o.kind)).join(',');
  const isLogAlpha = site.quantity === 'std' ? shape === 'scale:0.5,exp' || shape === 'exp,sqrt' || shape === 'exp,pow:0.5' : shape === 'exp';
  const isAlpha = site.quantity === 'std' ? shape === 'sqrt' || shape === 'pow:0.5' : shape === '';
  if (!isLogAlpha && !isAlpha) return null;
  const cls = trainable.attribute.cls;
  // The noisy value must be `self.<weight>` of the same class, a trainable parameter declared before the rate.
  const signal = unwrapParens(site.signal);
  if (signal.type !== 'attribute' || !signal.child('object') || !sem.isSelf(unwrapParens(signal.child('object')!))) return null;
  const weightName = signal.child('attribute')!.text;
  const weightLeaves = walk(sem, signal, [], null);
  if (weightLeaves.length !== 1 || !weightLeaves[0]!.trainable || weightLeaves[0]!.trainable.framework !== 'torch') return null;
  const weightDecl = weightLeaves[0]!.trainable.declaration;
  if (sem.moduleOf(weightDecl) !== sem.moduleOf(trainable.declaration) || weightDecl.start > trainable.declaration.start) return null;
  const declStatement = trainable.declaration.parent;
  if (declStatement?.type !== 'assignment' || declStatement.child('left')?.type !== 'attribute') return null;
  const init = sem.moduleOf(trainable.declaration).enclosingFunction(trainable.declaration);
  if (!init || init.name !== '__init__' || init.owner !== cls) return null;
  if (!onlyReads(sem, cls, trainable.attribute.name, declStatement.child('left')!)) return null;
  const torch = sem.moduleAlias(trainable.declaration, 'torch');
  const siteTorch = sem.moduleAlias(site.rate, 'torch');
  if (!torch || !siteTorch) return null;
  const taken = new Set<string>();
  for (const c of sem.ancestry(cls)) {
    for (const k of c.attributes.keys()) taken.add(k);
    for (const k of c.methods.keys()) taken.add(k);
  }
  let newName = 'log_sigma2';
  for (let i = 2; taken.has(newName); i++) newName = `log_sigma2_${i}`;
  const self = init.params[0]?.name ?? 'self';
  const weightRead = `${self}.${weightName}`;
  const initText = ['identifier', 'attribute', 'call', 'subscript', 'parenthesized_expression'].includes(unwrapParens(trainable.init).type) ? trainable.init.text : `(${trainable.init.text})`;
  const newInit = isLogAlpha ? `${initText} + ${torch}.log(${weightRead}.detach() ** 2 + 1e-8)` : `${torch}.log(${initText} * ${weightRead}.detach() ** 2 + 1e-8)`;
  const edits: TextEdit[] = [];
  edits.push(context.replace(declStatement.child('left')!.child('attribute')!, newName));
  edits.push(context.replace(trainable.init, newInit));
  // The old name becomes a derived property, inserted after __init__.
  const defNode = init.node;
  const indent = indentationOf(defNode);
  const derived = isLogAlpha ? `self.${newName} - ${torch}.log(self.${weightName} ** 2 + 1e-8)` : `${torch}.exp(self.${newName}) / (self.${weightName} ** 2 + 1e-8)`;
  edits.push(context.replaceRange(defNode, defNode.end, defNode.end, `\n\n${indent}@property\n${indent}def ${trainable.attribute.name}(self):\n${indent}    return ${derived}`));
  // The noise becomes additive with std exp(½·log σ²) (or variance exp(log σ²) in a local reparameterisation).
  const siteSelf = unwrapParens(signal.child('object')!).text;
  const std = `${siteTorch}.exp(0.5 * ${siteSelf}.${newName})`;
  const rewrite = site.rewrite;
  if (rewrite.shape === 'variance') edits.push(context.replace(rewrite.node, `${siteTorch}.exp(${siteSelf}.${newName})`));
  else if (rewrite.shape === 'scale') edits.push(context.replace(rewrite.node, std));
  else if (site.noise) {
    const noise = site.noise.text;
    if (rewrite.shape === 'product') {
      const sum = `${signal.text} + ${std} * ${noise}`;
      const standalone = ['assignment', 'return_statement', 'argument_list', 'expression_statement', 'keyword_argument', 'parenthesized_expression'].includes(rewrite.node.parent?.type ?? '');
      edits.push(context.replace(rewrite.node, standalone ? sum : `(${sum})`));
    }
    else edits.push(context.replace(rewrite.node, `${std} * ${noise}`));
  } else return null;
  return { title: `Use the additive parameterisation: store \`${newName}\` and derive \`${trainable.attribute.name}\` from it`, safety: 'review', edits };
}

/** Every reference to the attribute in the class hierarchy's files is a plain read (besides its one declaration). */
function onlyReads(sem: Semantics, cls: ClassInfo, name: string, declaration: SyntaxNode): boolean {
  const hierarchy = new Set(sem.subclassesOf(cls));
  const files = new Set<string>();
  for (const c of hierarchy) {
    const owner = sem.workspace.analysisOfNode(c.node);
    if (owner) for (const f of sem.workspace.dependentsOf(owner.file.absPath)) files.add(f);
  }
  for (const file of files) {
    const analysis = sem.workspace.analysis(file);
    if (!analysis) continue;
    for (const node of analysis.syntax.nodes) {
      if (node === declaration || node.type !== 'attribute' || node.child('attribute')?.text !== name) continue;
      const object = node.child('object');
      if (!object) continue;
      const type = sem.typeOf(object);
      if (type?.kind !== 'instance' || !hierarchy.has(type.cls)) continue;
      const parent = node.parent;
      if ((parent?.type === 'assignment' || parent?.type === 'augmented_assignment') && node.field === 'left') return false;
      if (parent?.type === 'attribute' && node.field === 'object' && /^(data|grad|requires_grad|.*_)$/.test(parent.child('attribute')?.text ?? '')) return false;
      if (parent && (parent.type === 'list' || parent.type === 'tuple') && parent.parent?.type === 'argument_list') return false;
    }
  }
  return true;
}

/** The leading whitespace of the line a node starts on. */
function indentationOf(node: SyntaxNode): string {
  const text = node.file.text;
  const lineStart = text.lastIndexOf('\n', node.start - 1) + 1;
  return /^[ \t]*/.exec(text.slice(lineStart))![0];
}
