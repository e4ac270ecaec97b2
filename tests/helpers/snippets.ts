// Small Python sources several suites share.

/**
 * A layer whose trainable σ scales Gaussian noise with nothing keeping it positive: one unconstrained-std finding
 * (on the `self.sigma` read in `forward`). The class only, ending with an empty line.
 */
export function unconstrainedStdClass(name: string): string[] {
  return [
    `class ${name}(nn.Module):`,
    '    def __init__(self):',
    '        super().__init__()',
    '        self.sigma = nn.Parameter(torch.full((6,), 0.2))',
    '',
    '    def forward(self, x):',
    '        return x + self.sigma * torch.randn_like(x)',
    '',
  ];
}

/** The same layer as a whole module (its imports, two blank lines, the class). */
export function unconstrainedStdModule(name: string): string {
  return ['import torch', 'from torch import nn', '', '', ...unconstrainedStdClass(name)].join('\n');
}
