// The semantic model on real parses: qualified names through imports and aliases, scopes and def-use, classes across
// files, the workspace index and its incremental updates, constant folding, and notebooks as workspace modules.
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { checkSources } from '../server/src/engine/check';
import { cliLocation, cliRange } from '../server/src/parse/locations';
import type { Binding } from '../server/src/semantic/module';
import { formatNumber } from '../server/src/semantic/values';
import { buildWorkspace, identifierOn, lineOf, nodeOf, notebookJson, type TestWorkspace, VIRTUAL_ROOT } from './helpers/workspace';

/** A short description of a binding for exact comparisons: kind, value text and 1-based line. */
function describeBinding(b: Binding): string {
  return `${b.kind}:${b.value ? b.value.text : '-'}@${lineOf(b.node.file.text, b.node.start)}`;
}

describe('qualified names through imports and aliases', () => {
  const source = [
    'import math',
    'import torch',
    'import torch.nn.functional as F',
    'from torch import nn',
    'from torch.nn import functional as fn',
    'from torch.nn.functional import softmax as sm',
    'import numpy as np, scipy.stats as st',
    '',
    '',
    'def stage_head(x, flag):',
    '    a = F.softplus(x)',
    '    b = nn.Parameter(x)',
    '    c = fn.softplus(x)',
    '    d = sm(x, dim=-1)',
    '    e = torch.nn.functional.softmax(x, -1)',
    '    sp = F.softplus',
    '    g = sp(x)',
    '    h = x.softmax(-1)',
    '    k = np.log(x)',
    '    m = st.norm(0, 1)',
    '    n = len(x)',
    '    p = undefined_helper(x)',
    '    if flag:',
    '        act = F.softplus',
    '    else:',
    '        act = torch.exp',
    '    q = act(x)',
    '    r = (F.softplus)(x)',
    '    s = x.exp().mean()',
    '    return math.log(2)',
    '',
  ].join('\n');
  let tw: TestWorkspace;
  const call = (text: string) => nodeOf(tw.analysis('heads.py'), 'call', text);

  it('resolves every import form to the same qualified name', async () => {
    tw = await buildWorkspace({ 'heads.py': source });
    const sem = tw.sem('heads.py');
    expect(sem.callee(call('F.softplus(x)')).qualifiedName).toBe('torch.nn.functional.softplus');
    expect(sem.callee(call('nn.Parameter(x)')).qualifiedName).toBe('torch.nn.Parameter');
    expect(sem.callee(call('fn.softplus(x)')).qualifiedName).toBe('torch.nn.functional.softplus');
    expect(sem.callee(call('sm(x, dim=-1)')).qualifiedName).toBe('torch.nn.functional.softmax');
    expect(sem.callee(call('torch.nn.functional.softmax(x, -1)')).qualifiedName).toBe('torch.nn.functional.softmax');
    expect(sem.callee(call('np.log(x)')).qualifiedName).toBe('numpy.log');
    expect(sem.callee(call('st.norm(0, 1)')).qualifiedName).toBe('scipy.stats.norm');
    expect(sem.callee(call('math.log(2)')).qualifiedName).toBe('math.log');
  });

  it('follows a local alias of a function (`sp = F.softplus; sp(x)`) and parentheses around the callee', () => {
    const sem = tw.sem('heads.py');
    expect(sem.callee(call('sp(x)')).qualifiedName).toBe('torch.nn.functional.softplus');
    expect(sem.callee(call('(F.softplus)(x)')).qualifiedName).toBe('torch.nn.functional.softplus');
  });

  it('gives no name when an alias is bound to different functions on two branches', () => {
    const sem = tw.sem('heads.py');
    const callee = sem.callee(call('act(x)'));
    expect(callee.qualifiedName).toBeNull();
    expect(callee.method).toBeNull();
  });

  it('names builtins and leaves unknown names unresolved', () => {
    const sem = tw.sem('heads.py');
    expect(sem.callee(call('len(x)')).qualifiedName).toBe('builtins.len');
    expect(sem.callee(call('undefined_helper(x)')).qualifiedName).toBeNull();
  });

  it('describes method calls on values by method and receiver', () => {
    const sem = tw.sem('heads.py');
    const callee = sem.callee(call('x.softmax(-1)'));
    expect(callee.qualifiedName).toBeNull();
    expect(callee.method).toBe('softmax');
    expect(callee.receiver?.text).toBe('x');
    expect(callee.symbol).toBeNull();
    expect(callee.boundMethod).toBe(false);
    const chained = sem.callee(call('x.exp().mean()'));
    expect(chained.method).toBe('mean');
    expect(chained.receiver?.text).toBe('x.exp()');
  });

  it('matches calls by qualified name or by `.method` in isCallTo', () => {
    const sem = tw.sem('heads.py');
    expect(sem.isCallTo(call('x.softmax(-1)'), ['.softmax'])).toBe(true);
    expect(sem.isCallTo(call('x.softmax(-1)'), ['torch.softmax', 'torch.nn.functional.softmax'])).toBe(false);
    expect(sem.isCallTo(call('sm(x, dim=-1)'), ['torch.softmax', 'torch.nn.functional.softmax'])).toBe(true);
    // A module function is not a method on a value, so `.softplus` does not match `F.softplus(x)`.
    expect(sem.isCallTo(call('F.softplus(x)'), ['.softplus'])).toBe(false);
    expect(sem.isCallTo(call('F.softplus(x)'), ['torch.nn.functional.softplus'])).toBe(true);
    // Only call nodes are calls.
    expect(sem.isCallTo(nodeOf(tw.analysis('heads.py'), 'attribute', 'F.softplus'), ['torch.nn.functional.softplus'])).toBe(false);
  });

  it('binds `import a.b.c` to the top package only, so attribute access walks into it', () => {
    const sem = tw.sem('heads.py');
    const torchBindings = tw.analysis('heads.py').module.exported('torch');
    expect(torchBindings.map((b) => [b.kind, b.qualifiedName])).toEqual([['import', 'torch']]);
    expect(tw.analysis('heads.py').module.exported('F').map((b) => b.qualifiedName)).toEqual(['torch.nn.functional']);
    expect(sem.qualifiedName(nodeOf(tw.analysis('heads.py'), 'attribute', 'torch.nn.functional.softmax'))).toBe('torch.nn.functional.softmax');
    expect([...tw.analysis('heads.py').module.importedModules].sort()).toEqual(['math', 'numpy', 'scipy.stats', 'torch', 'torch.nn', 'torch.nn.functional', 'torch.nn.functional.softmax']);
  });
});

describe('relative imports inside packages', () => {
  let tw: TestWorkspace;
  const files = {
    'lab/__init__.py': '',
    'lab/shared/__init__.py': '',
    'lab/shared/io.py': 'def load_gauges(path):\n    return path\n',
    'lab/riverlab/__init__.py': 'from .models import StageNet\nfrom . import layers\n',
    'lab/riverlab/layers.py': 'from torch import nn\n\n\nclass BayesLinear(nn.Module):\n    pass\n',
    'lab/riverlab/models.py': [
      'from .layers import BayesLinear',
      'from ..shared.io import load_gauges',
      'from ..shared import io as gauge_io',
      '',
      '',
      'class StageNet(BayesLinear):',
      '    pass',
      '',
      '',
      'head = BayesLinear()',
      'table = load_gauges("stations.csv")',
      'again = gauge_io.load_gauges("stations.csv")',
      '',
    ].join('\n'),
  };

  it('derives module names from paths, with `__init__.py` naming its package', async () => {
    tw = await buildWorkspace(files);
    expect(tw.workspace.file(tw.abs('lab/riverlab/models.py'))).toMatchObject({ moduleName: 'lab.riverlab.models', isPackage: false });
    expect(tw.workspace.file(tw.abs('lab/riverlab/__init__.py'))).toMatchObject({ moduleName: 'lab.riverlab', isPackage: true });
    expect(tw.workspace.file(tw.abs('lab/__init__.py'))).toMatchObject({ moduleName: 'lab', isPackage: true });
  });

  it('resolves `.` and `..` against the importing module', () => {
    const models = tw.analysis('lab/riverlab/models.py').module;
    expect(models.exported('BayesLinear').map((b) => b.qualifiedName)).toEqual(['lab.riverlab.layers.BayesLinear']);
    expect(models.exported('load_gauges').map((b) => b.qualifiedName)).toEqual(['lab.shared.io.load_gauges']);
    expect(models.exported('gauge_io').map((b) => b.qualifiedName)).toEqual(['lab.shared.io']);
    const init = tw.analysis('lab/riverlab/__init__.py').module;
    // In a package's __init__.py, `.` is the package itself.
    expect(init.exported('StageNet').map((b) => b.qualifiedName)).toEqual(['lab.riverlab.models.StageNet']);
    expect(init.exported('layers').map((b) => b.qualifiedName)).toEqual(['lab.riverlab.layers']);
  });

  it('follows relative imports to workspace classes and functions', () => {
    const sem = tw.sem('lab/riverlab/models.py');
    const analysis = tw.analysis('lab/riverlab/models.py');
    const head = sem.callee(nodeOf(analysis, 'call', 'BayesLinear()'));
    expect(head.qualifiedName).toBe('lab.riverlab.layers.BayesLinear');
    expect(head.symbol?.kind).toBe('class');
    const load = sem.callee(nodeOf(analysis, 'call', 'load_gauges("stations.csv")'));
    expect(load.symbol?.kind === 'function' ? load.symbol.fn.qualifiedName : null).toBe('lab.shared.io.load_gauges');
    const viaModule = sem.callee(nodeOf(analysis, 'call', 'gauge_io.load_gauges("stations.csv")'));
    expect(viaModule.symbol?.kind === 'function' ? viaModule.symbol.fn.qualifiedName : null).toBe('lab.shared.io.load_gauges');
    const stage = analysis.module.classes.find((c) => c.name === 'StageNet')!;
    expect(sem.isModuleClass(stage)).toBe(true);
    expect(sem.ancestry(stage).map((c) => c.qualifiedName)).toEqual(['lab.riverlab.models.StageNet', 'lab.riverlab.layers.BayesLinear']);
  });

  it('re-exports through a package __init__ (`from lab.riverlab import StageNet`)', async () => {
    tw.set('train.py', 'from lab.riverlab import StageNet\n\nnet = StageNet()\n');
    const sem = tw.sem('train.py');
    const net = sem.typeOf(identifierOn(tw.analysis('train.py'), 'net = StageNet()', 'net'));
    expect(net?.kind === 'instance' ? net.cls.qualifiedName : null).toBe('lab.riverlab.models.StageNet');
  });
});

describe('scopes and bindings', () => {
  const source = [
    'rate = 0.1',
    '',
    '',
    'class Gauge:',
    '    rate = 0.5',
    '    scale = rate * 2',
    '    items = [rate for _ in range(3)]',
    '    sizes = [n for n in range(int(rate))]',
    '',
    '    def read(self, rate_in=rate):',
    '        return rate',
    '',
    '',
    'shift = lambda rate: rate + 1',
    'bound = lambda r=rate: r',
    'counter = 0',
    '',
    '',
    'def bump():',
    '    global counter',
    '    counter = counter + 1',
    '',
    '',
    'after = counter',
    '',
    '',
    'def make_schedule():',
    '    step = 0',
    '',
    '    def advance():',
    '        nonlocal step',
    '        step += 1',
    '        return step',
    '    return advance',
    '',
    '',
    'def unpack(series, loader, path, lock):',
    '    a = b = 1',
    '    total = 0',
    '    total += 2',
    '    mu, sigma = 0.0, 1.0',
    '    lo, hi = series.split(2)',
    '    head, *rest = series',
    '    (left, (inner, outer)) = 3, (4, 5)',
    '    with open(path) as fh, lock as held:',
    '        pass',
    '    for i, batch in enumerate(loader):',
    '        pass',
    '    squares = [y * y for y in series]',
    '    if (count := len(series)) > 3:',
    '        pass',
    '    picked = [z for x in series if (z := x)]',
    '    try:',
    '        pass',
    '    except ValueError as err:',
    '        pass',
    '    return a, b, total, mu, sigma, lo, hi, head, rest, fh, held, i, batch, squares, count, z, err, left, inner, outer',
    '',
    '',
    'def fit(model: "Gauge", epochs: int = 10, *args, lr=1e-3, **kw):',
    '    return model, epochs, args, lr, kw',
    '',
    '',
    'def sep(a, /, b, *, c):',
    '    return a, b, c',
    '',
  ].join('\n');
  let tw: TestWorkspace;
  const ret = (name: string) => identifierOn(tw.analysis('scopes.py'), 'return a, b, total', name);

  it('opens module, class, function, lambda and comprehension scopes', async () => {
    tw = await buildWorkspace({ 'scopes.py': source });
    const module = tw.analysis('scopes.py').module;
    const kinds = module.scopes.map((s) => s.kind);
    expect(kinds.filter((k) => k === 'module')).toHaveLength(1);
    expect(kinds.filter((k) => k === 'class')).toHaveLength(1);
    // Functions: read, bump, make_schedule, advance, unpack, fit, sep.
    expect(kinds.filter((k) => k === 'function')).toHaveLength(7);
    expect(kinds.filter((k) => k === 'lambda')).toHaveLength(2);
    // Comprehensions: items, sizes, squares, picked.
    expect(kinds.filter((k) => k === 'comprehension')).toHaveLength(4);
  });

  it('lets a class body see its own names but not its methods or comprehensions', () => {
    const a = tw.analysis('scopes.py');
    const module = a.module;
    const inBody = module.resolveName(identifierOn(a, 'scale = rate * 2', 'rate'));
    expect(inBody.map(describeBinding)).toEqual(['assign:0.5@5']);
    expect(inBody[0]!.scope.kind).toBe('class');
    const inMethod = module.resolveName(identifierOn(a, '        return rate', 'rate'));
    expect(inMethod.map(describeBinding)).toEqual(['assign:0.1@1']);
    // A comprehension's element is its own scope and skips the class body.
    const inComprehension = module.resolveName(identifierOn(a, 'items = [rate for _', 'rate'));
    expect(inComprehension.map(describeBinding)).toEqual(['assign:0.1@1']);
    // The first iterable of a comprehension is evaluated in the class body.
    const inFirstIterable = module.resolveName(identifierOn(a, 'sizes = [n for n in range(int(rate))]', 'rate'));
    expect(inFirstIterable.map(describeBinding)).toEqual(['assign:0.5@5']);
    // A default value is evaluated where the function is defined (the class body).
    const inDefault = module.resolveName(identifierOn(a, 'def read(self, rate_in=rate)', 'rate'));
    expect(inDefault.map(describeBinding)).toEqual(['assign:0.5@5']);
  });

  it('binds lambda parameters in the lambda and evaluates their defaults outside', () => {
    const a = tw.analysis('scopes.py');
    const body = a.module.resolveName(identifierOn(a, 'shift = lambda rate: rate + 1', 'rate', 1));
    expect(body.map((b) => [b.kind, b.scope.kind])).toEqual([['param', 'lambda']]);
    const defaultValue = a.module.resolveName(identifierOn(a, 'bound = lambda r=rate: r', 'rate'));
    expect(defaultValue.map(describeBinding)).toEqual(['assign:0.1@1']);
    const param = a.module.resolveName(identifierOn(a, 'bound = lambda r=rate: r', 'r', 1));
    expect(param.map((b) => [b.kind, b.value?.text, b.scope.kind])).toEqual([['param', 'rate', 'lambda']]);
  });

  it('puts `global` assignments in the module scope and `nonlocal` ones in the enclosing function', () => {
    const a = tw.analysis('scopes.py');
    const module = a.module;
    expect(module.exported('counter').map(describeBinding)).toEqual(['assign:0@16', 'assign:counter + 1@21']);
    const inBump = module.resolveName(identifierOn(a, '    counter = counter + 1', 'counter', 1));
    expect(inBump.map(describeBinding)).toEqual(['assign:0@16', 'assign:counter + 1@21']);
    // At module level after the definition, the function has not necessarily run: both values may reach.
    const after = module.resolveName(identifierOn(a, 'after = counter', 'counter'));
    expect(after.map(describeBinding)).toEqual(['assign:0@16', 'assign:counter + 1@21']);
    const step = module.resolveName(identifierOn(a, '        return step', 'step'));
    expect(step.map((b) => [b.kind, lineOf(a.text, b.node.start), b.scope.kind, b.scope.node.child('name')?.text])).toEqual([
      ['assign', 28, 'function', 'make_schedule'],
      ['augassign', 32, 'function', 'make_schedule'],
    ]);
  });

  it('records every binding form with its value', () => {
    const a = tw.analysis('scopes.py');
    const m = a.module;
    const of = (name: string) => m.resolveName(ret(name));
    expect(of('a').map(describeBinding)).toEqual(['assign:1@38']);
    expect(of('b').map(describeBinding)).toEqual(['assign:1@38']);
    expect(of('total').map(describeBinding)).toEqual(['augassign:total += 2@40']);
    expect(of('mu').map(describeBinding)).toEqual(['assign:0.0@41']);
    expect(of('sigma').map(describeBinding)).toEqual(['assign:1.0@41']);
    expect(of('lo').map((b) => [b.kind, b.value, b.unpack?.from.text, b.unpack?.index])).toEqual([['assign', null, 'series.split(2)', 0]]);
    expect(of('hi').map((b) => [b.kind, b.value, b.unpack?.from.text, b.unpack?.index])).toEqual([['assign', null, 'series.split(2)', 1]]);
    expect(of('head').map((b) => [b.kind, b.unpack?.index])).toEqual([['assign', 0]]);
    expect(of('rest').map((b) => [b.kind, b.value, b.unpack])).toEqual([['assign', null, undefined]]);
    expect(of('left').map(describeBinding)).toEqual(['assign:3@44']);
    expect(of('inner').map(describeBinding)).toEqual(['assign:4@44']);
    expect(of('outer').map(describeBinding)).toEqual(['assign:5@44']);
    expect(of('fh').map(describeBinding)).toEqual(['with:open(path)@45']);
    expect(of('held').map(describeBinding)).toEqual(['with:lock@45']);
    expect(of('i').map((b) => [b.kind, b.iterated, b.unpack?.from.text, b.unpack?.index])).toEqual([['for', true, 'enumerate(loader)', 0]]);
    expect(of('batch').map((b) => [b.kind, b.iterated, b.unpack?.index])).toEqual([['for', true, 1]]);
    expect(of('squares').map(describeBinding)).toEqual(['assign:[y * y for y in series]@49']);
    expect(of('count').map(describeBinding)).toEqual(['walrus:len(series)@50']);
    // A walrus inside a comprehension binds in the enclosing function.
    expect(of('z').map((b) => [b.kind, b.value?.text, b.scope.kind])).toEqual([['walrus', 'x', 'function']]);
    expect(of('err').map(describeBinding)).toEqual(['except:-@55']);
  });

  it('binds comprehension targets in the comprehension, invisible outside it', () => {
    const a = tw.analysis('scopes.py');
    const y = a.module.resolveName(identifierOn(a, 'squares = [y * y for y in series]', 'y'));
    expect(y.map((b) => [b.kind, b.iterated, b.value?.text, b.scope.kind])).toEqual([['comprehension', true, 'series', 'comprehension']]);
    const fnScope = a.module.scopeFor(a.module.functions.find((f) => f.name === 'unpack')!.node)!;
    expect(fnScope.bindings.has('y')).toBe(false);
    expect(fnScope.bindings.has('x')).toBe(false);
  });

  it('records parameters with positions, defaults and annotations', () => {
    const module = tw.analysis('scopes.py').module;
    const fit = module.functions.find((f) => f.name === 'fit')!;
    expect(fit.params.map((p) => [p.name, p.paramIndex, p.value?.text ?? null, p.annotation?.text ?? null])).toEqual([
      ['model', 0, null, '"Gauge"'],
      ['epochs', 1, '10', 'int'],
      ['args', 2, null, null],
      ['lr', 3, '1e-3', null],
      ['kw', 4, null, null],
    ]);
    const sep = module.functions.find((f) => f.name === 'sep')!;
    expect(sep.params.map((p) => [p.name, p.paramIndex])).toEqual([
      ['a', 0],
      ['b', 1],
      ['c', 2],
    ]);
    expect(fit.qualifiedName).toBe('scopes.fit');
    expect(module.functions.find((f) => f.name === 'read')!.qualifiedName).toBe('scopes.Gauge.read');
    expect(module.functions.find((f) => f.name === 'advance')!.qualifiedName).toBe('scopes.make_schedule.advance');
  });
});

describe('reaching definitions', () => {
  const source = [
    'def run(flag, xs, ys):',
    '    lr = 0.1',
    '    lr = 0.01',
    '    use1 = lr',
    '    if flag:',
    '        lr = 0.5',
    '    use2 = lr',
    '    if flag:',
    '        w = 1',
    '    elif ys:',
    '        w = 2',
    '    else:',
    '        w = 3',
    '    use3 = w',
    '    acc = 0',
    '    for x in xs:',
    '        use4 = acc',
    '        acc = acc + x',
    '    use5 = acc',
    '    if flag:',
    '        z = 1',
    '        z = 2',
    '        use6 = z',
    '    n = 0',
    '    while n < 10:',
    '        n = n + 1',
    '    use7 = n',
    '    try:',
    '        t = 1',
    '    except ValueError:',
    '        t = 2',
    '    use8 = t',
    '    return use1, use2, use3, use4, use5, use6, use7, use8',
    '',
  ].join('\n');
  let tw: TestWorkspace;
  const reaching = (line: string, name: string, occurrence = 0) => {
    const a = tw.analysis('flow.py');
    return a.module.resolveName(identifierOn(a, line, name, occurrence)).map(describeBinding);
  };

  it('keeps only the last unconditional binding', async () => {
    tw = await buildWorkspace({ 'flow.py': source });
    expect(reaching('use1 = lr', 'lr')).toEqual(['assign:0.01@3']);
  });

  it('keeps a conditional binding together with the one it may not replace', () => {
    expect(reaching('use2 = lr', 'lr')).toEqual(['assign:0.01@3', 'assign:0.5@6']);
  });

  it('keeps every branch of an if/elif/else', () => {
    expect(reaching('use3 = w', 'w')).toEqual(['assign:1@9', 'assign:2@11', 'assign:3@13']);
  });

  it('carries bindings around a loop', () => {
    expect(reaching('use4 = acc', 'acc')).toEqual(['assign:0@15', 'assign:acc + x@18']);
    expect(reaching('use5 = acc', 'acc')).toEqual(['assign:0@15', 'assign:acc + x@18']);
    expect(reaching('        n = n + 1', 'n', 1)).toEqual(['assign:0@24', 'assign:n + 1@26']);
    expect(reaching('use7 = n', 'n')).toEqual(['assign:0@24', 'assign:n + 1@26']);
  });

  it('lets an unconditional binding inside the same branch win', () => {
    expect(reaching('use6 = z', 'z')).toEqual(['assign:2@22']);
  });

  it('keeps both the try body and the handler', () => {
    expect(reaching('use8 = t', 't')).toEqual(['assign:1@29', 'assign:2@31']);
  });

  it('evaluates the value before binding, so `x = f(x)` reads the earlier `x`', async () => {
    const rebind = await buildWorkspace({ 'rebind.py': 'def g(raw):\n    sigma = raw\n    sigma = sigma.exp()\n    return sigma\n' });
    const a = rebind.analysis('rebind.py');
    expect(a.module.resolveName(identifierOn(a, 'sigma = sigma.exp()', 'sigma', 1)).map(describeBinding)).toEqual(['assign:raw@2']);
    expect(a.module.resolveName(identifierOn(a, 'return sigma', 'sigma')).map(describeBinding)).toEqual(['assign:sigma.exp()@3']);
    const origins = rebind.sem('rebind.py').origins(identifierOn(a, 'return sigma', 'sigma'));
    expect(origins.map((o) => o.node.text)).toEqual(['sigma.exp()']);
  });

  it('resolves a `for` target used in its own iterable to the earlier binding', async () => {
    const loop = await buildWorkspace({ 'loop.py': 'def f(batches):\n    batch = batches[0]\n    for batch in batch.split():\n        print(batch)\n' });
    const a = loop.analysis('loop.py');
    expect(a.module.resolveName(identifierOn(a, 'for batch in batch.split()', 'batch', 1)).map(describeBinding)).toEqual(['assign:batches[0]@2']);
    expect(a.module.resolveName(identifierOn(a, 'print(batch)', 'batch')).map((b) => [b.kind, lineOf(a.text, b.node.start)])).toEqual([['for', 3]]);
  });
});

/** Three files: a base module class with parameters, a subclass in another file, and a script that uses them. */
const CLASS_FILES = {
  'models.py': [
    'import torch',
    'from torch import nn',
    '',
    '',
    'class GaugeBase(nn.Module):',
    '    def __init__(self, width):',
    '        super().__init__()',
    '        self.width = width',
    '        self.log_sigma = nn.Parameter(torch.zeros(width))',
    '        self.register_parameter("rho", nn.Parameter(torch.ones(width)))',
    '        self.register_buffer("prior_std", torch.ones(width))',
    '',
    '    def noise_scale(self):',
    '        return self.log_sigma.exp()',
    '',
    '    @property',
    '    def sigma(self):',
    '        return self.log_sigma.exp()',
    '',
    '    @staticmethod',
    '    def describe(other):',
    '        other.tag = "gauge"',
    '        return other',
    '',
    '',
    'class Encoder(nn.Module):',
    '    def forward(self, x):',
    '        return x',
    '',
    '',
    'def build_base(width):',
    '    return GaugeBase(width)',
    '',
    '',
    'def make_scale():',
    '    return torch.full((3,), 0.2)',
    '',
    '',
    'def widen(width=16):',
    '    return width',
    '',
  ].join('\n'),
  'stage.py': [
    'from models import Encoder, GaugeBase',
    '',
    '',
    'class StageNet(GaugeBase):',
    '    def __init__(self, width):',
    '        super().__init__(width)',
    '        self.encoder = Encoder()',
    '',
    '    def forward(self, x):',
    '        h = self.encoder(x)',
    '        return h * self.sigma',
    '',
    '',
    'class Plain:',
    '    def forward(self, x):',
    '        return x',
    '',
    '',
    'class Mixed(Plain, StageNet):',
    '    pass',
    '',
  ].join('\n'),
  'evaluate.py': [
    'import copy',
    'import torch',
    'from stage import StageNet',
    'from models import build_base, make_scale',
    '',
    'net = StageNet(8)',
    'twin = copy.deepcopy(net)',
    'moved = net.to("cpu")',
    'frozen = net.eval().to("cpu")',
    'built = build_base(4)',
    'scale = make_scale()',
    's = net.sigma',
    't = net.noise_scale()',
    'u = net.log_sigma',
    'v = net.rho',
    'opt = torch.optim.Adam(net.parameters())',
    '',
    '',
    'def score(model: StageNet, batch):',
    '    return model(batch)',
    '',
  ].join('\n'),
};

describe('classes across files', () => {
  let tw: TestWorkspace;
  const classNamed = (file: string, name: string) => tw.analysis(file).module.classes.find((c) => c.name === name)!;
  const typeName = (file: string, lineText: string, name: string) => {
    const t = tw.sem(file).typeOf(identifierOn(tw.analysis(file), lineText, name));
    return t === null ? null : t.kind === 'instance' ? t.cls.qualifiedName : `external:${t.qualifiedName}`;
  };

  it('sees an nn.Module subclass through a base defined in another file', async () => {
    tw = await buildWorkspace(CLASS_FILES);
    const sem = tw.sem('evaluate.py');
    expect(sem.isModuleClass(classNamed('stage.py', 'StageNet'))).toBe(true);
    expect(sem.isModuleClass(classNamed('models.py', 'Encoder'))).toBe(true);
    expect(sem.isModuleClass(classNamed('stage.py', 'Plain'))).toBe(false);
    expect(sem.isModuleClass(classNamed('stage.py', 'Mixed'))).toBe(true);
    expect(sem.baseTypes(classNamed('models.py', 'GaugeBase'))).toEqual([{ kind: 'external', qualifiedName: 'torch.nn.Module' }]);
  });

  it('orders ancestry and finds methods through it', () => {
    const sem = tw.sem('stage.py');
    const mixed = classNamed('stage.py', 'Mixed');
    expect(sem.ancestry(mixed).map((c) => c.qualifiedName)).toEqual(['stage.Mixed', 'stage.Plain', 'stage.StageNet', 'models.GaugeBase']);
    expect(sem.findMethod(mixed, 'forward')?.qualifiedName).toBe('stage.Plain.forward');
    expect(sem.findMethod(classNamed('stage.py', 'StageNet'), 'noise_scale')?.qualifiedName).toBe('models.GaugeBase.noise_scale');
    expect(sem.findMethod(classNamed('stage.py', 'StageNet'), 'missing')).toBeNull();
    expect([...classNamed('models.py', 'GaugeBase').methods.keys()]).toEqual(['__init__', 'noise_scale', 'sigma', 'describe']);
  });

  it('lists subclasses in every file that depends on the class', () => {
    const sem = tw.sem('evaluate.py');
    expect(sem.subclassesOf(classNamed('models.py', 'GaugeBase')).map((c) => c.qualifiedName).sort()).toEqual(['models.GaugeBase', 'stage.Mixed', 'stage.StageNet']);
    expect(sem.subclassesOf(classNamed('stage.py', 'Plain')).map((c) => c.qualifiedName).sort()).toEqual(['stage.Mixed', 'stage.Plain']);
  });

  it('records `self.x = …` and registered parameters and buffers as attributes, but not writes in static methods', () => {
    const base = classNamed('models.py', 'GaugeBase');
    expect([...base.attributes.keys()]).toEqual(['width', 'log_sigma', 'rho', 'prior_std']);
    expect(base.attributes.get('log_sigma')!.map((a) => [a.value?.text, a.method?.name])).toEqual([['nn.Parameter(torch.zeros(width))', '__init__']]);
    expect(base.attributes.get('rho')!.map((a) => [a.target.text, a.value?.text])).toEqual([['"rho"', 'nn.Parameter(torch.ones(width))']]);
    // A buffer is not trainable: its value is not followed.
    expect(base.attributes.get('prior_std')!.map((a) => a.value)).toEqual([null]);
    expect([...classNamed('stage.py', 'StageNet').attributes.keys()]).toEqual(['encoder']);
    const inherited = tw.sem('stage.py').attributeBindings(classNamed('stage.py', 'StageNet'), 'log_sigma');
    expect(inherited.map((a) => a.cls.qualifiedName)).toEqual(['models.GaugeBase']);
  });

  it('tells the class of an instance through calls, copies, self-returning methods, factories and annotations', () => {
    expect(typeName('evaluate.py', 'net = StageNet(8)', 'net')).toBe('stage.StageNet');
    expect(typeName('evaluate.py', 'twin = copy.deepcopy(net)', 'twin')).toBe('stage.StageNet');
    expect(typeName('evaluate.py', 'moved = net.to("cpu")', 'moved')).toBe('stage.StageNet');
    expect(typeName('evaluate.py', 'frozen = net.eval().to("cpu")', 'frozen')).toBe('stage.StageNet');
    expect(typeName('evaluate.py', 'built = build_base(4)', 'built')).toBe('models.GaugeBase');
    expect(typeName('evaluate.py', 'return model(batch)', 'model')).toBe('stage.StageNet');
    expect(typeName('evaluate.py', 'opt = torch.optim.Adam', 'opt')).toBe('external:torch.optim.Adam');
    expect(typeName('evaluate.py', 'scale = make_scale()', 'scale')).toBeNull();
    const encoder = nodeOf(tw.analysis('stage.py'), 'attribute', 'self.encoder', 1);
    const t = tw.sem('stage.py').typeOf(encoder);
    expect(t?.kind === 'instance' ? t.cls.qualifiedName : null).toBe('models.Encoder');
  });

  it('resolves methods called on instances to the workspace method, as bound calls', () => {
    const sem = tw.sem('evaluate.py');
    const callee = sem.callee(nodeOf(tw.analysis('evaluate.py'), 'call', 'net.noise_scale()'));
    expect(callee.method).toBe('noise_scale');
    expect(callee.symbol?.kind === 'function' ? callee.symbol.fn.qualifiedName : null).toBe('models.GaugeBase.noise_scale');
    expect(callee.boundMethod).toBe(true);
    const build = sem.callee(nodeOf(tw.analysis('evaluate.py'), 'call', 'build_base(4)'));
    expect(build.qualifiedName).toBe('models.build_base');
    expect(build.boundMethod).toBe(false);
  });

  it('follows values through properties, argument-less methods, helpers, attributes and defaults', () => {
    const sem = tw.sem('evaluate.py');
    const a = tw.analysis('evaluate.py');
    const originsOf = (lineText: string, name: string) => sem.origins(identifierOn(a, lineText, name)).map((o) => [o.node.text, o.attribute ? `${o.attribute.cls.name}.${o.attribute.name}` : null]);
    expect(originsOf('s = net.sigma', 's')).toEqual([['self.log_sigma.exp()', null]]);
    expect(originsOf('t = net.noise_scale()', 't')).toEqual([['self.log_sigma.exp()', null]]);
    expect(originsOf('scale = make_scale()', 'scale')).toEqual([['torch.full((3,), 0.2)', null]]);
    expect(originsOf('u = net.log_sigma', 'u')).toEqual([['nn.Parameter(torch.zeros(width))', 'GaugeBase.log_sigma']]);
    expect(originsOf('v = net.rho', 'v')).toEqual([['nn.Parameter(torch.ones(width))', 'GaugeBase.rho']]);
    const models = tw.analysis('models.py');
    const width = tw.sem('models.py').origins(identifierOn(models, '    return width', 'width'));
    expect(width.map((o) => [o.node.text, o.parameter?.name ?? null])).toEqual([
      ['16', null],
      ['width', 'width'],
    ]);
  });
});

describe('properties resolved through imports', () => {
  it('follows functools.cached_property under any alias, and not a local function named `property`', async () => {
    const tw = await buildWorkspace({
      'probe.py': [
        'import functools',
        'from functools import cached_property as cp',
        '',
        '',
        'def property(fn):',
        '    return fn',
        '',
        '',
        'class Probe:',
        '    def __init__(self):',
        '        self.raw = read_sensor()',
        '',
        '    @functools.cached_property',
        '    def a(self):',
        '        return self.raw',
        '',
        '    @cp',
        '    def b(self):',
        '        return self.raw',
        '',
        '    @property',
        '    def c(self):',
        '        return self.raw',
        '',
        '',
        'p = Probe()',
        'uses = [p.a, p.b, p.c]',
        '',
      ].join('\n'),
    });
    const a = tw.analysis('probe.py');
    const sem = tw.sem('probe.py');
    const originsOf = (text: string) => sem.origins(nodeOf(a, 'attribute', text)).map((o) => [o.node.text, o.attribute ? `${o.attribute.cls.name}.${o.attribute.name}` : null]);
    expect(originsOf('p.a')).toEqual([['read_sensor()', 'Probe.raw']]);
    expect(originsOf('p.b')).toEqual([['read_sensor()', 'Probe.raw']]);
    expect(originsOf('p.c')).toEqual([['p.c', null]]);
  });
});

describe('the workspace index', () => {
  let tw: TestWorkspace;

  it('knows which file defines what', async () => {
    tw = await buildWorkspace(CLASS_FILES);
    const sem = tw.sem('evaluate.py');
    expect(tw.workspace.moduleFileByName('models')).toBe(tw.abs('models.py'));
    const base = sem.symbolOfQualifiedName('models.GaugeBase');
    expect(base?.kind === 'class' ? base.cls.node.file : null).toBe(tw.analysis('models.py').syntax);
    const method = sem.symbolOfQualifiedName('models.GaugeBase.noise_scale');
    expect(method?.kind === 'function' ? method.fn.qualifiedName : null).toBe('models.GaugeBase.noise_scale');
    expect(sem.symbolOfQualifiedName('stage.GaugeBase')).toMatchObject({ kind: 'class' });
    expect(sem.symbolOfQualifiedName('models.nothing_here')).toEqual({ kind: 'external', qualifiedName: 'models.nothing_here' });
    expect(sem.symbolOfQualifiedName('torch.nn.Module')).toEqual({ kind: 'external', qualifiedName: 'torch.nn.Module' });
    expect(sem.symbolOfQualifiedName('models')).toMatchObject({ kind: 'module' });
  });

  it('answers importsOf and dependentsOf', () => {
    const ws = tw.workspace;
    expect(ws.importsOf(tw.abs('evaluate.py'))).toEqual([tw.abs('stage.py'), tw.abs('models.py')]);
    expect(ws.importsOf(tw.abs('stage.py'))).toEqual([tw.abs('models.py')]);
    expect(ws.importsOf(tw.abs('models.py'))).toEqual([]);
    expect([...ws.dependentsOf(tw.abs('models.py'))].sort()).toEqual([tw.abs('evaluate.py'), tw.abs('models.py'), tw.abs('stage.py')]);
    expect([...ws.dependentsOf(tw.abs('evaluate.py'))]).toEqual([tw.abs('evaluate.py')]);
  });

  it('invalidates only the changed file, and the change is seen from a file that depends on it', () => {
    const ws = tw.workspace;
    const sem = tw.sem('evaluate.py');
    const stageBefore = tw.analysis('stage.py');
    const modelsBefore = tw.analysis('models.py');
    const stageNet = stageBefore.module.classes.find((c) => c.name === 'StageNet')!;
    expect(sem.isModuleClass(stageNet)).toBe(true);
    expect(tw.set('models.py', CLASS_FILES['models.py'])).toBe(false);
    expect(tw.analysis('models.py')).toBe(modelsBefore);
    const plainBase = CLASS_FILES['models.py'].replace('class GaugeBase(nn.Module):', 'class GaugeBase:');
    expect(tw.set('models.py', plainBase)).toBe(true);
    expect(tw.analysis('stage.py')).toBe(stageBefore);
    expect(tw.analysis('evaluate.py')).toBe(sem.analysis);
    expect(tw.analysis('models.py')).not.toBe(modelsBefore);
    expect(ws.file(tw.abs('models.py'))!.version).toBeGreaterThan(ws.file(tw.abs('evaluate.py'))!.version);
    // The same query object answers from the new text: the cached answers were dropped.
    expect(sem.isModuleClass(stageNet)).toBe(false);
    expect(tw.set('models.py', CLASS_FILES['models.py'])).toBe(true);
    expect(sem.isModuleClass(stageNet)).toBe(true);
  });

  it('follows a change of the import graph', () => {
    const ws = tw.workspace;
    expect(ws.dependentsOf(tw.abs('stage.py')).has(tw.abs('evaluate.py'))).toBe(true);
    tw.set('evaluate.py', 'from models import build_base\n\nbuilt = build_base(4)\n');
    expect(ws.dependentsOf(tw.abs('stage.py')).has(tw.abs('evaluate.py'))).toBe(false);
    expect(ws.importsOf(tw.abs('evaluate.py'))).toEqual([tw.abs('models.py')]);
    tw.set('evaluate.py', CLASS_FILES['evaluate.py']);
    expect(ws.dependentsOf(tw.abs('stage.py')).has(tw.abs('evaluate.py'))).toBe(true);
  });

  it('forgets a removed file', () => {
    const ws = tw.workspace;
    expect(ws.removeFile(tw.abs('models.py'))).toBe(true);
    expect(ws.removeFile(tw.abs('models.py'))).toBe(false);
    expect(ws.analysis(tw.abs('models.py'))).toBeNull();
    expect(ws.moduleFileByName('models')).toBeNull();
    const sem = tw.sem('stage.py');
    const stageNet = tw.analysis('stage.py').module.classes.find((c) => c.name === 'StageNet')!;
    expect(sem.baseTypes(stageNet)).toEqual([{ kind: 'external', qualifiedName: 'models.GaugeBase' }]);
    expect(sem.isModuleClass(stageNet)).toBe(false);
    expect(ws.importsOf(tw.abs('stage.py'))).toEqual([]);
    expect(ws.allFiles().map((f) => f.path)).toEqual(['evaluate.py', 'stage.py']);
  });

  it('resolves two `models.py` in different folders relative to the importer', async () => {
    const nn = 'from torch import nn\n\n\nclass Net(nn.Module):\n    pass\n';
    const plain = 'class Net:\n    pass\n';
    const script = 'from models import Net\n\nnet = Net()\n';
    const amb = await buildWorkspace({
      'station_a/models.py': nn,
      'station_a/train.py': script,
      'station_b/models.py': plain,
      'station_b/train.py': script,
      'tools/report.py': 'from station_b.models import Net\n\nnet = Net()\n',
    });
    const typeIn = (file: string) => {
      const sem = amb.sem(file);
      const t = sem.typeOf(identifierOn(amb.analysis(file), 'net = Net()', 'net'));
      return t?.kind === 'instance' ? [t.cls.qualifiedName, sem.isModuleClass(t.cls)] : null;
    };
    expect(typeIn('station_a/train.py')).toEqual(['station_a.models.Net', true]);
    expect(typeIn('station_b/train.py')).toEqual(['station_b.models.Net', false]);
    expect(typeIn('tools/report.py')).toEqual(['station_b.models.Net', false]);
    expect(amb.workspace.moduleFileByName('models')).toBeNull();
    expect(amb.workspace.moduleFileByName('station_a.models')).toBe(amb.abs('station_a/models.py'));
    expect(amb.workspace.importsOf(amb.abs('station_a/train.py'))).toEqual([amb.abs('station_a/models.py')]);
    expect([...amb.workspace.dependentsOf(amb.abs('station_b/models.py'))].sort()).toEqual([amb.abs('station_b/models.py'), amb.abs('station_b/train.py'), amb.abs('tools/report.py')]);
  });

  it('answers across files even when only one analysis is kept in memory', async () => {
    const small = await buildWorkspace(CLASS_FILES, { cacheLimit: 1 });
    const evaluate = small.analysis('evaluate.py');
    const sem = small.sem('evaluate.py');
    const net = sem.typeOf(identifierOn(evaluate, 'net = StageNet(8)', 'net'));
    expect(net?.kind === 'instance' ? [net.cls.qualifiedName, sem.isModuleClass(net.cls)] : null).toEqual(['stage.StageNet', true]);
    expect(net?.kind === 'instance' ? sem.findMethod(net.cls, 'noise_scale')?.qualifiedName : null).toBe('models.GaugeBase.noise_scale');
    const base = sem.symbolOfQualifiedName('models.GaugeBase');
    expect(base?.kind === 'class' ? sem.subclassesOf(base.cls).map((c) => c.qualifiedName).sort() : null).toEqual(['models.GaugeBase', 'stage.Mixed', 'stage.StageNet']);
  });
});

describe('constant folding', () => {
  const source = [
    'import math',
    'import numpy as np',
    '',
    'n_train = 48_000',
    'batch = 0x40',
    'octal = 0o17',
    'binary = 0b101',
    'lr = 1e-3',
    'frac = .5',
    'big = 2.5E3',
    'grouped = 1_000.5',
    'cfg = {"n_train": 60_000, "batch_size": 128, "name": "river"}',
    'sizes = [32, 64, 128]',
    'steps = n_train // batch',
    'rem = n_train % 7',
    'neg_mod = -7 % 3',
    'floor_neg = -7 // 2',
    'power = 2 ** 10',
    'neg_power = -2 ** 2',
    'inv_power = 2 ** -1',
    'neg = -batch',
    'as_int = int(2.9)',
    'as_int_neg = int(-2.9)',
    'as_int_str = int("42")',
    'count = len([1, 2, 3])',
    'count_named = len(sizes)',
    'log_n = math.log(n_train)',
    'np_sqrt = np.sqrt(16)',
    'by_key = cfg["n_train"]',
    'by_missing_key = cfg["epochs"]',
    'by_index = sizes[-1]',
    'ratio = n_train / batch',
    'mixed = (n_train + 2_000) / 1e3',
    'zero_div = n_train / 0',
    'zero_floordiv = 1 // 0',
    'zero_mod = 1 % 0',
    'huge = 10.0 ** 400',
    'text = "river"',
    'fstr = f"{n_train}"',
    'flag_on = True',
    'unknown = something + 1',
    'twice_plain = 1',
    'twice_plain = 2',
    'if flag_on:',
    '    twice = 1',
    'else:',
    '    twice = 2',
    'total = 10',
    'total += 5',
    'uses = [twice_plain, twice, total]',
    '',
    '',
    'def scaled(kl, n=n_train):',
    '    return kl / n',
    '',
  ].join('\n');
  let tw: TestWorkspace;
  const fold = (name: string) => {
    const a = tw.analysis('config.py');
    const bindings = a.module.exported(name);
    const value = bindings[bindings.length - 1]!.value!;
    return tw.sem('config.py').fold(value);
  };
  const foldName = (name: string) => tw.sem('config.py').fold(identifierOn(tw.analysis('config.py'), 'uses = [', name));

  it('folds literals: underscores, hex, octal, binary, floats and scientific notation', async () => {
    tw = await buildWorkspace({ 'config.py': source });
    expect(fold('n_train')).toBe(48000);
    expect(fold('batch')).toBe(64);
    expect(fold('octal')).toBe(15);
    expect(fold('binary')).toBe(5);
    expect(fold('lr')).toBe(0.001);
    expect(fold('frac')).toBe(0.5);
    expect(fold('big')).toBe(2500);
    expect(fold('grouped')).toBe(1000.5);
    expect(fold('text')).toBe('river');
    expect(fold('flag_on')).toBe(true);
  });

  it('folds arithmetic with Python semantics (floor division and modulo round toward minus infinity)', () => {
    // Check values: Python 3 (`48000 // 64 == 750`, `48000 % 7 == 1`, `-7 % 3 == 2`, `-7 // 2 == -4`, `-2 ** 2 == -4`).
    expect(fold('steps')).toBe(750);
    expect(fold('rem')).toBe(1);
    expect(fold('neg_mod')).toBe(2);
    expect(fold('floor_neg')).toBe(-4);
    expect(fold('power')).toBe(1024);
    expect(fold('neg_power')).toBe(-4);
    expect(fold('inv_power')).toBe(0.5);
    expect(fold('neg')).toBe(-64);
    expect(fold('ratio')).toBe(750);
    expect(fold('mixed')).toBe(50);
  });

  it('folds int(), len() of literal lists, math functions and dict or list lookups', () => {
    expect(fold('as_int')).toBe(2);
    expect(fold('as_int_neg')).toBe(-2);
    expect(fold('as_int_str')).toBe(42);
    expect(fold('count')).toBe(3);
    expect(fold('count_named')).toBe(3);
    // Check value: Python's math.log(48000) == 10.778956289890028.
    expect(fold('log_n')).toBeCloseTo(10.778956289890028, 12);
    expect(fold('np_sqrt')).toBe(4);
    expect(fold('by_key')).toBe(60000);
    expect(fold('by_missing_key')).toBeNull();
    expect(fold('by_index')).toBe(128);
  });

  it('gives null for division by zero, overflow, f-strings and unknown names', () => {
    expect(fold('zero_div')).toBeNull();
    expect(fold('zero_floordiv')).toBeNull();
    expect(fold('zero_mod')).toBeNull();
    expect(fold('huge')).toBeNull();
    expect(fold('fstr')).toBeNull();
    expect(fold('unknown')).toBeNull();
  });

  it('follows a name to its one reaching binding, not to names bound conditionally twice', () => {
    expect(foldName('twice_plain')).toBe(2);
    expect(foldName('twice')).toBeNull();
    // An augmented assignment is not folded.
    expect(foldName('total')).toBeNull();
    // A parameter's default counts only while the parameter has one binding.
    const a = tw.analysis('config.py');
    expect(tw.sem('config.py').fold(nodeOf(a, 'binary_operator', 'kl / n'))).toBeNull();
    expect(tw.sem('config.py').fold(identifierOn(a, '    return kl / n', 'n'))).toBe(48000);
  });
});

describe('formatNumber', () => {
  it('groups integers with commas and keeps four significant digits otherwise', () => {
    expect(formatNumber(48000)).toBe('48,000');
    expect(formatNumber(1234567)).toBe('1,234,567');
    expect(formatNumber(-60000)).toBe('-60,000');
    expect(formatNumber(0)).toBe('0');
    expect(formatNumber(750)).toBe('750');
    expect(formatNumber(0.5)).toBe('0.5');
    expect(formatNumber(2 / 3)).toBe('0.6667');
    expect(formatNumber(1234.56)).toBe('1,235');
    expect(formatNumber(0.0001234)).toBe('1.234e-4');
    expect(formatNumber(10.778956289890028)).toBe('10.78');
    expect(formatNumber(Number.POSITIVE_INFINITY)).toBe('Infinity');
    expect(formatNumber(Number.NaN)).toBe('NaN');
  });
});

describe('notebooks in the workspace', () => {
  const notebook = notebookJson([
    { type: 'markdown', source: '# Soil-moisture sensor drift\nOne probe per field plot.\n' },
    { type: 'code', source: '%matplotlib inline\nimport torch\nfrom torch import nn\nfrom probes import Probe\n' },
    { type: 'code', source: 'class Drift(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.scale = nn.Parameter(torch.ones(3))\n' },
    { type: 'markdown', source: 'Draw one noisy reading.' },
    { type: 'code', source: '!pip list\nm = Drift()\ntag = "🌧"; noise = torch.randn(3) * m.scale\nfiles = !ls\nm?\np = Probe()\n' },
  ]);
  const probes = 'from torch import nn\n\n\nclass Probe(nn.Module):\n    pass\n';
  let tw: TestWorkspace;

  it('parses a notebook with magics and shell lines without syntax errors', async () => {
    tw = await buildWorkspace({ 'notebooks/drift.ipynb': notebook, 'notebooks/probes.py': probes });
    const a = tw.analysis('notebooks/drift.ipynb');
    expect(a.file.kind).toBe('notebook');
    expect(a.unreadable).toBeNull();
    expect(a.syntax.errors).toEqual([]);
    expect(a.notebook!.cells.map((c) => c.index)).toEqual([1, 2, 4]);
    expect(a.text.slice(a.text.indexOf('matplotlib') - 1, a.text.indexOf('matplotlib'))).toBe('#');
  });

  it('resolves a class defined in one cell where a later cell uses it, and an import of a sibling module', () => {
    const a = tw.analysis('notebooks/drift.ipynb');
    const sem = tw.sem('notebooks/drift.ipynb');
    const m = sem.typeOf(identifierOn(a, 'm = Drift()', 'm'));
    expect(m?.kind === 'instance' ? [m.cls.qualifiedName, sem.isModuleClass(m.cls)] : null).toEqual(['notebooks.drift.Drift', true]);
    const p = sem.typeOf(identifierOn(a, 'p = Probe()', 'p'));
    expect(p?.kind === 'instance' ? [p.cls.qualifiedName, sem.isModuleClass(p.cls)] : null).toEqual(['notebooks.probes.Probe', true]);
    expect(tw.workspace.dependentsOf(tw.abs('notebooks/probes.py')).has(tw.abs('notebooks/drift.ipynb'))).toBe(true);
    const origins = sem.origins(nodeOf(a, 'attribute', 'm.scale'));
    expect(origins.map((o) => [o.node.text, o.attribute?.name])).toEqual([['nn.Parameter(torch.ones(3))', 'scale']]);
  });

  it('maps a finding back to its cell and the line and code-point column inside it', async () => {
    const [report] = await checkSources([{ path: 'notebooks/drift.ipynb', absPath: path.join(VIRTUAL_ROOT, 'notebooks/drift.ipynb'), text: notebook }, { path: 'notebooks/probes.py', absPath: path.join(VIRTUAL_ROOT, 'notebooks/probes.py'), text: probes }], {
      workspaceRoot: VIRTUAL_ROOT,
      settingsFor: () => ({ severity: {}, datasetSizeNames: [] }),
      rules: { only: ['unconstrained-std'] },
    });
    expect(report!.notes).toEqual([]);
    expect(report!.findings.map((f) => [f.rule, report!.text.slice(f.start, f.end)])).toEqual([['unconstrained-std', 'm.scale']]);
    const finding = report!.findings[0]!;
    // `tag = "🌧"; noise = torch.randn(3) * ` is 36 code points (37 UTF-16 units: the emoji is a surrogate pair).
    expect(cliLocation(report!, finding.start)).toEqual({ cell: 4, line: 3, column: 37 });
    expect(cliRange(report!, finding.start, finding.end)).toEqual({ cell: 4, line: 3, column: 37, endLine: 3, endColumn: 44 });
    // The related location (the declaration) is in an earlier cell of the same notebook.
    const related = finding.related[0]!;
    expect(cliLocation(report!, related.start)).toEqual({ cell: 2, line: 4, column: 22 });
  });
});
