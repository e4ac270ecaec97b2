// elbo-scale-mismatch: a minibatch ELBO whose data term and KL term are not weighted N : 1 (PyTorch losses that
// reach an optimiser, Pyro observation plates sized by the minibatch, TFP layers with an unscaled KL under `fit`).
import { defineRule, type Fix, type Figure, type RuleContext, type SyntaxNode, type TextEdit, unwrapParens } from '../../server/src/engine/api';
import { correctText, excerpt, factorWords, formText, messageNumber, numbersSentence, SOURCE_PYRO, SOURCE_TFP, weightFigures } from './describe';
import { Flow } from './flow';
import { asFactor, batchSizeExpression, findInScope, needsParens, type ScopeExpression } from './in-scope';
import { batchTensorParameter, checkPlate, type PlateFinding } from './pyro-plate';
import { type Dims, isDimensionless, ONE, pyroPlateScale, readLiteralAs, relativeKlWeight } from './scale';
import { Expander } from './terms';
import { checkLayer, type LayerFinding } from './tfp-layers';
import { judge, type Verdict, verdictsForFile } from './torch-loss';

/** The rule: PyTorch losses, Pyro plates and TFP layers whose KL weight is not N : 1 against the data term. */
export const rule = defineRule({
  meta: {
    id: 'elbo-scale-mismatch',
    title: 'Minibatch ELBO with the data term and the KL term not weighted N : 1',
    family: 'variational',
    defaultSeverity: 'warning',
    status: { stage: 'experimental', since: '0.1.0' },
    fix: 'sometimes',
    messages: {
      weight:
        'KL weighted {factor} too {strength}: the loss is {form} where a minibatch ELBO needs {correct}; `{data}` is {dataForm} and the KL term `{kl}` {klForm}.{numbers}{hint}',
      pyro:
        'Observation plate sized by the minibatch: `{size}` is the length of the batch that `{step}` feeds to `{model}`, so Pyro scales the likelihood by 1 instead of N/B and the KL to the prior is weighted K× too strongly.{numbers} Give the plate the dataset size and let Pyro rescale: `pyro.plate({name}, N, subsample_size={size})`.{hint}',
      'pyro-unsized':
        'Observation plate without a size in a model that `{step}` feeds minibatches: Pyro scales the likelihood by 1 instead of N/B, so the KL to the prior is weighted K× too strongly.{numbers} Give the plate the dataset size and the batch size: `pyro.plate({name}, N, subsample_size=<batch length>)`.{hint}',
      tfp: '`{layer}` adds {klForm} to the model\'s losses at every step while `fit` averages the compiled loss over each batch: the KL is weighted {factor} too {strength} ({form} instead of mean(NLL) + KL/N).{numbers} Divide the KL by the number of training examples in `{argument}`.{hint}',
    },
    settings: ['dataset-size-names'],
  },
  create(context) {
    const flow = new Flow(context.sem, context.settings.datasetSizeNames);
    const expander = new Expander(flow);
    const absPath = context.sem.analysis.file.absPath;
    return {
      call(node) {
        const plate = checkPlate(flow, node);
        if (plate) {
          reportPlate(context, flow, plate);
          return;
        }
        const layer = checkLayer(flow, node);
        if (layer) reportLayer(context, flow, layer);
      },
      'file:end'() {
        for (const verdict of verdictsForFile(flow, expander, absPath)) reportVerdict(context, flow, verdict);
      },
    };
  },
});

/** Reports a PyTorch loss whose KL weight is off. */
function reportVerdict(context: RuleContext, flow: Flow, v: Verdict): void {
  const words = factorWords(v.dims, v.numeric);
  if (!words) return;
  const klRelative = v.klRelative;
  const meanOverWeights = v.kl.reduction === 'mean';
  const fixes = torchFixes(context, flow, v);
  const hint = fixes.length > 0 ? '' : noFixHint(v, meanOverWeights);
  const inScope = v.n.text ? null : findInScope(flow, v.combo.node, 'N', v.loader);
  const nText = v.n.text ?? inScope?.text ?? null;
  // A batch sum divided by the batch size is a per-example mean (and a mean times B a sum): say it as it reads.
  const dataDims = v.data.scale.dims;
  const shown = v.reduction === 'sum' && dataDims.b === -1 && dataDims.n === 0 ? 'mean' : v.reduction === 'mean' && dataDims.b === 1 && dataDims.n === 0 ? 'sum' : v.reduction;
  const shownKl = shown === v.reduction ? klRelative : { ...klRelative, b: klRelative.b + (shown === 'mean' ? -1 : 1) };
  context.report({
    node: v.combo.node,
    messageId: 'weight',
    data: {
      factor: words.factor,
      strength: words.strength,
      form: formText(shown, shownKl, meanOverWeights),
      correct: correctText(shown),
      data: excerpt(v.combo.dataSide?.text ?? v.data.core.text),
      kl: excerpt(v.combo.klSide?.text ?? v.kl.core.text),
      dataForm: shown === 'mean' ? 'a per-example mean over the minibatch' : 'summed over the minibatch',
      klForm: meanOverWeights ? 'averages the KL over the weights (the ELBO sums it)' : 'holds the total KL',
      numbers: numbersSentence({ n: v.n.value, b: v.b.value, numeric: v.numeric, strength: words.strength }) + (v.dims.p !== 0 ? ' P is the number of weights the KL is averaged over.' : '') + (v.relative.schedule ? ' The KL weight schedule is counted at its final value 1.' : ''),
      hint,
    },
    figures: weightFigures({ n: v.n.value, nText, b: v.b.value, bText: v.b.text, numeric: v.numeric, symbolic: words.symbolic, strength: words.strength }),
    fixes,
    related: [context.related(v.data.core, 'data term'), context.related(v.kl.core, 'KL term'), ...(v.root !== v.combo.node ? [context.related(v.root, 'optimised here')] : [])],
  });
}

/** What to write when no expression for N is in scope. */
function noFixHint(v: Verdict, meanOverWeights: boolean): string {
  if (meanOverWeights) return ' Sum the KL over the weights (`.sum()`) instead of averaging it.';
  if (v.reduction === 'mean') return ' No dataset-size expression is in scope here: divide the KL by the number of training examples (for example `len(train_loader.dataset)`, or a name listed in `dataset-size-names`).';
  return ' No batch-count expression is in scope here: divide the KL by the number of batches per epoch (for example `len(train_loader)`), or scale the summed data term by N/B.';
}

/** An expression for N^n·B^b at a node (N, K = N/B or B), with whether it is known by data flow. */
function expressionFor(flow: Flow, at: SyntaxNode, dims: Dims, v: Verdict): (ScopeExpression & { compound: boolean }) | null {
  if (dims.p !== 0) return null;
  if (dims.n === 1 && dims.b === 0) {
    const n = findInScope(flow, at, 'N', v.loader);
    return n ? { ...n, compound: false } : null;
  }
  if (dims.n === 1 && dims.b === -1) {
    const k = findInScope(flow, at, 'K', v.loader);
    if (k) return { ...k, compound: false };
    const n = findInScope(flow, at, 'N', v.loader);
    const b = batchSizeExpression(flow, at, v.data.inputs);
    return n && b ? { text: `${asFactor(n.text)} / ${asFactor(b.text)}`, strong: n.strong && b.strong, value: null, compound: true } : null;
  }
  if (dims.n === 0 && dims.b === 1) {
    const b = batchSizeExpression(flow, at, v.data.inputs);
    return b ? { ...b, compound: false } : null;
  }
  return null;
}

/** Fixes for a PyTorch loss: rescale the KL operand (safe when N comes from data flow), or scale a summed data term by N/B. */
function torchFixes(context: RuleContext, flow: Flow, v: Verdict): Fix[] {
  const fixes: Fix[] = [];
  const klSide = v.combo.klSide;
  const dataSide = v.combo.dataSide;
  const at = v.combo.node;
  if (!klSide || !dataSide || !v.uniformKl || (klSide.file === v.data.core.file && klSide.contains(v.data.core))) return fixes;
  const side = unwrapParens(klSide);
  const dims = v.dims;
  if (dims.p !== 0) {
    // KL averaged over weights and otherwise right: sum it instead.
    if (dims.p === -1 && dims.n === 0 && dims.b === 0) {
      const mean = v.kl.reducer ? meanCall(v.kl.reducer) : null;
      if (mean) fixes.push({ title: 'Sum the KL over the weights instead of averaging it', safety: 'safe', edits: [context.replace(mean, 'sum')] });
    }
    return fixes;
  }
  // Replace a divisor that means B, K or N by the right one, or append the missing factor.
  let edit: { edits: TextEdit[]; title: string; strong: boolean } | null = null;
  // The KL operand, or the one assignment of a name used as the operand (`kl = model.kl() / xb.size(0)`).
  let host = side;
  if (side.type === 'identifier') {
    const bindings = flow.sem.bindings(side);
    const value = bindings.length === 1 && bindings[0]!.kind === 'assign' && !bindings[0]!.unpack ? bindings[0]!.value : null;
    if (value && value.file === side.file) host = unwrapParens(value);
  }
  if (host.type === 'binary_operator' && host.child('operator')?.text === '/') {
    const divisor = host.child('right')!;
    const s = flow.scaleOf(divisor, null);
    if (!s.opaque && s.symbols.length > 0 && s.dims.p === 0) {
      const wanted: Dims = { n: s.dims.n + dims.n, b: s.dims.b + dims.b, p: 0 };
      const expr = isDimensionless(wanted) ? null : expressionFor(flow, at, wanted, v);
      if (expr) edit = { edits: [context.replace(divisor, expr.compound ? `(${expr.text})` : asFactor(expr.text))], title: `Divide the KL by \`${expr.text}\` instead of \`${divisor.text}\``, strong: expr.strong };
    }
  }
  if (!edit) {
    const heavy = dims.n > 0 || (dims.n === 0 && dims.b > 0);
    const factorDims = heavy ? dims : { n: -dims.n, b: -dims.b, p: 0 };
    const expr = expressionFor(flow, at, factorDims, v);
    if (expr) {
      const base = klSide.type !== 'parenthesized_expression' && needsParens(side) ? `(${klSide.text})` : klSide.text;
      const factor = expr.compound ? `(${expr.text})` : asFactor(expr.text);
      edit = heavy ? { edits: [context.replace(klSide, `${base} / ${factor}`)], title: `Divide the KL term by \`${expr.text}\``, strong: expr.strong } : { edits: [context.replace(klSide, `${base} * ${factor}`)], title: `Multiply the KL term by \`${expr.text}\``, strong: expr.strong };
    }
  }
  if (edit) fixes.push({ title: edit.title, safety: edit.strong ? 'safe' : 'review', edits: edit.edits });
  // Sum form with the KL once per batch: the other correct form scales the data term by N/B.
  if (v.reduction === 'sum' && dims.n === 1 && dims.b === -1 && !v.combo.dataSideHasKl) {
    const n = findInScope(flow, at, 'N', v.loader);
    const b = batchSizeExpression(flow, at, v.data.inputs);
    if (n && b) {
      const base = dataSide.type !== 'parenthesized_expression' && needsParens(unwrapParens(dataSide)) ? `(${dataSide.text})` : dataSide.text;
      fixes.push({ title: `Scale the summed data term by N/B (\`* ${n.text} / ${b.text}\`)`, safety: 'review', edits: [context.replace(dataSide, `${base} * ${asFactor(n.text)} / ${asFactor(b.text)}`)] });
    }
  }
  return fixes;
}

/** The `mean` name of a `.mean()` / `torch.mean(...)` reduction that averages a KL over the weights. */
function meanCall(core: SyntaxNode): SyntaxNode | null {
  const fn = core.type === 'call' ? core.child('function') : null;
  if (fn?.type === 'attribute' && fn.child('attribute')?.text === 'mean') return fn.child('attribute');
  return null;
}

/** Reports a Pyro observation plate sized by the minibatch. */
function reportPlate(context: RuleContext, flow: Flow, p: PlateFinding): void {
  const sem = flow.sem;
  const name = sem.argument(p.plate, 0, 'name');
  const figures: Figure[] = [
    { label: 'N (training examples)', value: p.n ?? 'not found' },
    { label: 'B (examples per step)', value: p.b ?? (p.size ? `\`${p.size.text}\`` : 'not folded') },
    { label: 'likelihood scale applied now', value: 1, source: SOURCE_PYRO },
  ];
  if (p.n !== null && p.b !== null) figures.push({ label: 'likelihood scale with subsample_size (N/B)', value: pyroPlateScale(p.n, p.b), source: SOURCE_PYRO });
  const numbers = p.n !== null && p.b !== null ? ` With N = ${messageNumber(p.n)} and B = ${messageNumber(p.b)}, Pyro should scale the likelihood by N/B = ${messageNumber(pyroPlateScale(p.n, p.b))}.` : '';
  const fix = plateFix(context, flow, p);
  const hint = fix ? '' : ' No dataset-size expression is in scope in the model: pass the number of training examples into the model (or set it as an attribute) and use it as the plate size.';
  context.report({
    node: p.plate,
    messageId: p.size ? 'pyro' : 'pyro-unsized',
    data: { size: p.size ? excerpt(p.size.text) : '', step: excerpt(p.step.text, 40), model: p.model.owner ? `${p.model.owner.name}.${p.model.name}` : p.model.name, name: name ? name.text : '"data"', numbers, hint },
    figures,
    fixes: fix ? [fix] : [],
    related: [context.related(p.step, 'minibatches are fed here')],
  });
}

/** Gives the plate the dataset size and `subsample_size` (the minibatch length it had). */
function plateFix(context: RuleContext, flow: Flow, p: PlateFinding): Fix | null {
  const n = findInScope(flow, p.plate, 'N', null);
  if (!n) return null;
  const sem = flow.sem;
  if (p.size) {
    const holder = p.size.parent?.type === 'keyword_argument' ? p.size.parent : null;
    const edit = holder ? context.replace(holder, `size=${n.text}, subsample_size=${p.size.text}`) : context.replace(p.size, `${n.text}, subsample_size=${p.size.text}`);
    return { title: `Use the dataset size \`${n.text}\` with \`subsample_size=${p.size.text}\``, safety: 'review', edits: [edit] };
  }
  const batch = batchTensorParameter(p);
  const name = sem.argument(p.plate, 0, 'name');
  if (!batch || !name || name.parent?.type === 'keyword_argument') return null;
  return { title: `Use the dataset size \`${n.text}\` with \`subsample_size=len(${batch})\``, safety: 'review', edits: [context.replaceRange(name, name.end, name.end, `, ${n.text}, subsample_size=len(${batch})`)] };
}

/** Reports a TFP variational layer whose KL is not divided by N. */
function reportLayer(context: RuleContext, flow: Flow, l: LayerFinding): void {
  const klScale = readLiteralAs(l.klScale, { n: l.n, b: l.b });
  const relative = relativeKlWeight({ data: ONE, reduction: l.reduction, kl: klScale });
  const judgement = judge({ relative, regime: 'minibatch', n: l.n, b: l.b });
  if (!judgement.fire) return;
  const words = factorWords(judgement.dims, judgement.numeric);
  if (!words) return;
  const fix = layerFix(context, flow, l);
  const hint = fix ? '' : ' No dataset-size expression is in scope here: use the number of rows passed to `fit`.';
  const figures = weightFigures({ n: l.n, nText: l.fitInputs ? `len(${l.fitInputs.text})` : null, b: l.b, bText: null, numeric: judgement.numeric, symbolic: words.symbolic, strength: words.strength });
  figures.push({ label: 'divergence added per step', value: l.divergence ? excerpt(l.divergence.text) : 'kl_divergence(q, p) (default)', source: SOURCE_TFP });
  context.report({
    node: l.layer,
    messageId: 'tfp',
    data: {
      layer: l.layerName,
      klForm: layerKlForm(l),
      factor: words.factor,
      strength: words.strength,
      form: formText(l.reduction, klScale.dims, false),
      numbers: numbersSentence({ n: l.n, b: l.b, numeric: judgement.numeric, strength: words.strength }),
      argument: l.argumentName,
      hint,
    },
    figures,
    fixes: fix ? [fix] : [],
    related: [context.related(l.fit, 'trained here with a mean-reduced loss')],
  });
}

/** How the layer adds its KL, in words. */
function layerKlForm(l: LayerFinding): string {
  const given = l.divergence && unwrapParens(l.divergence).type !== 'none';
  if (l.argumentName === 'kl_weight') return given ? `its KL times \`kl_weight=${excerpt(l.divergence!.text, 40)}\`` : 'its full KL (no `kl_weight`)';
  return given ? `the KL as \`${excerpt(l.divergence!.text, 50)}\`` : 'its full KL (the default divergence function does not scale it)';
}

/** Passes a divergence function divided by N (or `kl_weight=1 / N`). */
function layerFix(context: RuleContext, flow: Flow, l: LayerFinding): Fix | null {
  const sem = flow.sem;
  let n = findInScope(flow, l.layer, 'N', null);
  if (!n && l.fitInputs && unwrapParens(l.fitInputs).type === 'identifier') {
    const module = sem.moduleOf(l.layer);
    const here = module.lookup(l.fitInputs.text, l.layer);
    const there = sem.bindings(unwrapParens(l.fitInputs));
    if (here.length > 0 && here.every((b) => there.includes(b)) && here.every((b) => b.node.start < l.layer.start)) n = { text: `len(${l.fitInputs.text})`, strong: true, value: null };
  }
  if (!n) return null;
  let value: string;
  if (l.argumentName === 'kl_weight') value = `1 / ${asFactor(n.text)}`;
  else {
    const kl = distributionsName(flow, l.layer);
    if (!kl) return null;
    value = `lambda q, p, _: ${kl}.kl_divergence(q, p) / ${asFactor(n.text)}`;
  }
  const args = l.layer.child('arguments');
  if (!args) return null;
  let edit: TextEdit;
  if (l.divergence) edit = context.replace(l.divergence, value);
  else {
    const last = args.namedChildren[args.namedChildren.length - 1];
    edit = last ? context.replaceRange(l.layer, last.end, last.end, `, ${l.argumentName}=${value}`) : context.replaceRange(l.layer, args.start + 1, args.start + 1, `${l.argumentName}=${value}`);
  }
  return { title: `Divide the layer's KL by \`${n.text}\``, safety: n.strong ? 'safe' : 'review', edits: [edit] };
}

/** The file's own name for `tensorflow_probability.distributions` (`tfd`, or `tfp.distributions`). */
function distributionsName(flow: Flow, at: SyntaxNode): string | null {
  const sem = flow.sem;
  const module = sem.moduleOf(at);
  let tfp: string | null = null;
  for (const [name, bindings] of module.moduleScope.bindings) {
    if (bindings.length !== 1) continue;
    const b = bindings[0]!;
    const q = b.kind === 'import' ? b.qualifiedName : b.kind === 'assign' && b.value && (b.value.type === 'attribute' || b.value.type === 'identifier') ? sem.qualifiedName(b.value) : null;
    if (q === 'tensorflow_probability.distributions') return name;
    if (q === 'tensorflow_probability') tfp = name;
  }
  return tfp ? `${tfp}.distributions` : null;
}
