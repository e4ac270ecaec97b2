// Deeply nested Python texts: 3,000-deep expressions of every recursive shape the grammar has, long chains of
// definitions and 300-deep blocks, each written so that the rules' own code paths (losses, KL terms, MC loops, noise
// scales) see them.

/** Nesting depth of the expression shapes. */
export const DEPTH = 3000;
/** Nesting depth of the block shapes (Python itself stops at 100 indentation levels; the tool must not care). */
export const BLOCK_DEPTH = 300;

const HEADER = 'import torch\nimport torch.nn.functional as F\nfrom torch import nn\n\n';

/** A named deep text. */
export interface DeepShape {
  name: string;
  text: string;
}

function repeat(parts: string, n: number, separator = ''): string {
  return Array.from({ length: n }, () => parts).join(separator);
}

/** Every deep shape, at the given depth. */
export function deepShapes(n = DEPTH, blocks = BLOCK_DEPTH): DeepShape[] {
  const shapes: DeepShape[] = [
    { name: 'nested parentheses', text: `x = ${'('.repeat(n)}1${')'.repeat(n)}\n` },
    { name: 'nested calls of a library function', text: `x = ${'torch.exp('.repeat(n)}y${')'.repeat(n)}\n` },
    { name: 'nested calls of an unknown function', text: `x = ${'f('.repeat(n)}y${')'.repeat(n)}\n` },
    { name: 'nested softmax calls', text: `x = ${'F.softmax('.repeat(n)}y${', -1)'.repeat(n)}\n` },
    { name: 'nested softplus calls', text: `x = ${'F.softplus('.repeat(n)}y${')'.repeat(n)}\n` },
    { name: 'a model applied to its own output', text: `x = ${'model('.repeat(n)}y${')'.repeat(n)}\n` },
    { name: 'nested stacks averaged', text: `x = ${'torch.stack(['.repeat(n)}y${'])'.repeat(n)}.mean(0)\n` },
    { name: 'a chain of method calls', text: `x = y${'.exp()'.repeat(n)}\n` },
    { name: 'a chain of means', text: `x = y${'.mean(0)'.repeat(n)}\n` },
    { name: 'a chain of attributes', text: `x = a${'.b'.repeat(n)}\n` },
    { name: 'a chain of subscripts', text: `x = a${'[0]'.repeat(n)}\n` },
    { name: 'nested lists', text: `x = ${'['.repeat(n)}${']'.repeat(n)}\n` },
    { name: 'nested dictionaries', text: `x = ${'{"a": '.repeat(n)}1${'}'.repeat(n)}\n` },
    { name: 'nested tuple targets', text: `${'('.repeat(n)}a,${'),'.repeat(n - 1)}) = z\n` },
    { name: 'nested loop targets', text: `for ${'('.repeat(n)}a,${'),'.repeat(n - 1)}) in z:\n    pass\n` },
    { name: 'unary minus', text: `x = ${'-'.repeat(n)}1\n` },
    { name: 'not', text: `class M(nn.Module):\n    def forward(self, x):\n        if ${repeat('not ', n)}self.training:\n            x = x + torch.randn_like(x)\n        return x\n` },
    { name: 'nested lambdas', text: `f = ${repeat('lambda: ', n)}1\n` },
    { name: 'a chain of conditional expressions', text: `x = ${repeat('F.softmax(y, -1)', n, ' if c else ')}\n` },
    { name: 'a sum of terms', text: `loss = ${repeat('F.cross_entropy(out, y)', n, ' + ')} + kl\nloss.backward()\n` },
    { name: 'a sum of KL terms', text: `loss = F.cross_entropy(out, y) + ${repeat('model.kl()', n, ' + ')}\nloss.backward()\n` },
    { name: 'a product of factors', text: `x = torch.ones(3)${' * 2'.repeat(n)}\nkl = torch.distributions.kl_divergence(p, q)${' * 2'.repeat(n)}\n` },
    { name: 'a quotient of factors', text: `kl = torch.log(sigma${' / 2'.repeat(n)})\n` },
    { name: 'a power tower', text: `x = ${repeat('a', n, '**')}\n` },
    { name: 'a boolean chain', text: `x = ${repeat('a', n, ' and ')}\n` },
    { name: 'a comparison chain', text: `x = ${repeat('a', n, ' < ')}\n` },
    { name: 'nested walrus', text: `x = ${'(a := '.repeat(n)}1${')'.repeat(n)}\n` },
    { name: 'nested keyword calls', text: `x = ${'f(a='.repeat(n)}1${')'.repeat(n)}\n` },
    { name: 'nested comprehensions', text: `x = ${'['.repeat(n)}y ${Array.from({ length: n }, (_, i) => `for a${i} in z]`).join(' ')}\n` },
    { name: 'nested generators', text: `x = ${'('.repeat(n)}y ${Array.from({ length: n }, (_, i) => `for a${i} in z)`).join(' ')}\n` },
    { name: 'await chain', text: `async def g():\n    x = ${repeat('await ', n)}y\n` },
    { name: 'many decorators', text: `${Array.from({ length: n }, (_, i) => `@d${i}\n`).join('')}def f():\n    pass\n` },
    { name: 'a long elif chain', text: `if a:\n    pass\n${repeat('elif a:\n    pass\n', n)}` },
    { name: 'a chain of assignments from a parameter', text: `a0 = nn.Parameter(torch.ones(3))\n${Array.from({ length: n }, (_, i) => `a${i + 1} = a${i} * 2\n`).join('')}z = torch.distributions.Normal(0, a${n})\n` },
    { name: 'a reassigned parameter', text: `s = nn.Parameter(torch.ones(3))\n${repeat('s = s * 2\n', n)}z = torch.distributions.Normal(0, s)\n` },
    { name: 'a chain of functions returning each other', text: `def f0():\n    return nn.Parameter(torch.ones(3))\n${Array.from({ length: n }, (_, i) => `def f${i + 1}():\n    return f${i}()\n`).join('')}z = torch.distributions.Normal(0, f${n}())\n` },
    { name: 'a chain of subclasses', text: `class C0(nn.Module):\n    pass\n${Array.from({ length: n }, (_, i) => `class C${i + 1}(C${i}):\n    pass\n`).join('')}` },
    { name: 'an MC loop over a model applied to its own output', text: `model.eval()\npreds = []\nfor _ in range(10):\n    preds.append(${'model('.repeat(n)}x${')'.repeat(n)})\np = torch.stack(preds).mean(0).softmax(-1)\n` },
    {
      name: 'multiplicative noise with long products',
      text: `class L(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.s = nn.Parameter(torch.ones(3))\n        self.log_alpha = nn.Parameter(torch.zeros(3))\n\n    def forward(self, x):\n        return x * (1 + ${repeat('self.log_alpha.exp().sqrt()', n, ' * ')} * torch.randn_like(x)) + ${repeat('self.s', n, ' + ')} * torch.randn_like(x)\n`,
    },
  ];
  const ifs: string[] = [];
  for (let i = 0; i < blocks; i++) ifs.push(`${'    '.repeat(i)}${i % 3 === 0 ? 'if x:' : i % 3 === 1 ? 'for i in y:' : `def f${i}(self):`}`);
  ifs.push(`${'    '.repeat(blocks)}return x * torch.randn_like(x)`);
  shapes.push({ name: `${blocks}-deep blocks (if, for, def)`, text: `${ifs.join('\n')}\n` });
  const classes: string[] = [];
  for (let i = 0; i < blocks; i++) classes.push(`${'    '.repeat(i)}class C${i}(nn.Module):`);
  classes.push(`${'    '.repeat(blocks)}sigma = nn.Parameter(torch.ones(3))`);
  shapes.push({ name: `${blocks}-deep nested classes`, text: `${classes.join('\n')}\n` });
  const withs: string[] = [];
  for (let i = 0; i < blocks; i++) withs.push(`${'    '.repeat(i)}with torch.no_grad():`);
  withs.push(`${'    '.repeat(blocks)}out = torch.stack([model(x) for _ in range(10)]).mean(0).softmax(-1)`);
  shapes.push({ name: `${blocks}-deep with blocks around an MC average`, text: `${withs.join('\n')}\n` });
  return shapes.map((s) => ({ name: s.name, text: HEADER + s.text }));
}
