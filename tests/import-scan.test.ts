// The import scan that builds the workspace's import graph without parsing: hand-written cases for every form of
// the import statement and for text that only looks like one, then agreement with the semantic model (the parser's
// import statements) on every fixture of the repository, and on mutated fixtures, where it may only find more.
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { getParser } from '../server/src/engine/check';
import { PythonDocument } from '../server/src/parse/document';
import { readNotebook } from '../server/src/parse/notebook';
import { scanImports } from '../server/src/semantic/import-scan';
import { ModuleAnalysis } from '../server/src/semantic/module';
import { allFixtures, recordCount, runs, seed } from './reliability/fixtures';

const scan = (text: string, moduleName = 'lab.train', isPackage = false) => scanImports(text, moduleName, isPackage).sort();

describe('scanImports on each form of the import statement', () => {
  it('reads plain, dotted, aliased and listed imports', () => {
    expect(scan('import torch\nimport torch.nn.functional as F, numpy as np\nimport a . b\n')).toEqual(['a.b', 'numpy', 'torch', 'torch.nn.functional']);
  });

  it('reads from-imports with aliases, parentheses, comments, line continuations and a star', () => {
    const text = ['from torch import nn, optim as o', 'from lab.models import (', '    Gauge,  # the layer', '    Basin as B,', ')', 'from lab.data \\', '    import loader', 'from tools import *', ''].join('\n');
    expect(scan(text)).toEqual(['lab.data', 'lab.data.loader', 'lab.models', 'lab.models.Basin', 'lab.models.Gauge', 'tools', 'torch', 'torch.nn', 'torch.optim']);
  });

  it('resolves relative imports against the module, and against the package itself in __init__', () => {
    expect(scan('from . import layers\nfrom .models import Gauge\nfrom .. import shared\n', 'lab.sub.train')).toEqual(['lab', 'lab.shared', 'lab.sub', 'lab.sub.layers', 'lab.sub.models', 'lab.sub.models.Gauge']);
    expect(scan('from .models import Gauge\n', 'lab.sub', true)).toEqual(['lab.sub.models', 'lab.sub.models.Gauge']);
  });

  it('finds imports inside functions, after a semicolon and after a one-line compound statement', () => {
    const text = ['def load():', '    import yaml', '    return yaml', 'x = 1; import json', 'if TYPE_CHECKING: from lab.models import Gauge', 'try: import scipy', 'except ImportError: pass', ''].join('\n');
    expect(scan(text)).toEqual(['json', 'lab.models', 'lab.models.Gauge', 'scipy', 'yaml']);
  });

  it('ignores what only looks like an import: strings, docstrings, comments, names and keywords in expressions', () => {
    const text = [
      '"""Usage:',
      'import lab.secret',
      '"""',
      "note = 'import os'",
      "raw = rb'from x import y'",
      'f"""{1}',
      'from fake import thing',
      '"""',
      '# import commented',
      'important = 1',
      'imports = [important]',
      'value = call(import_path, from_dir)',
      'x = {"a": 1}',
      '',
    ].join('\n');
    expect(scan(text)).toEqual([]);
  });

  it('keeps going after an unterminated one-line string, and reads non-ASCII module names', () => {
    expect(scan("s = 'open\nimport torch\nimport données.modèle as m\n")).toEqual(['données.modèle', 'torch']);
  });

  it('reads nothing from an empty text or a bare keyword', () => {
    expect(scan('')).toEqual([]);
    expect(scan('import\nfrom\nfrom torch\n')).toEqual([]);
  });
});

/**
 * The modules the semantic model records for a text (the parser's view), and for a text with syntax errors those of
 * the import statements the parser reads cleanly (no error inside) at the start of a line: the ones that do not depend
 * on how the parser's error recovery happened to cut the broken part.
 */
function modelImports(parser: Awaited<ReturnType<typeof getParser>>, text: string, moduleName: string, isPackage: boolean): { modules: string[]; errors: number; clean: string[] } {
  const syntax = PythonDocument.parse(parser, text).syntax;
  const clean = new Set<string>();
  for (const node of syntax.nodes) {
    if (node.type !== 'import_statement' && node.type !== 'import_from_statement') continue;
    if (syntax.errors.some((e) => e.start < node.end && e.end > node.start) || node.start === node.end) continue;
    const lineStart = text.lastIndexOf('\n', node.start - 1) + 1;
    if (text.slice(lineStart, node.start).trim() !== '') continue;
    for (const m of scanImports(node.text, moduleName, isPackage)) clean.add(m);
  }
  return { modules: [...new ModuleAnalysis(syntax, moduleName, isPackage).importedModules].sort(), errors: syntax.errors.length, clean: [...clean] };
}

function moduleOf(rel: string): { moduleName: string; isPackage: boolean } {
  const parts = rel.replace(/\.(py|ipynb)$/, '').split('/');
  const isPackage = parts[parts.length - 1] === '__init__';
  if (isPackage) parts.pop();
  return { moduleName: parts.join('.') || 'main', isPackage };
}

describe('scanImports agrees with the parser', () => {
  it('on every fixture, file by file (notebooks through their code cells)', async () => {
    const parser = await getParser();
    let files = 0;
    for (const fixture of allFixtures()) {
      for (const file of fixture.files) {
        let text = file.text;
        if (file.rel.endsWith('.ipynb')) {
          try {
            text = readNotebook(file.text).text;
          } catch {
            continue;
          }
        }
        const { moduleName, isPackage } = moduleOf(file.rel);
        const model = modelImports(parser, text, moduleName, isPackage);
        const scanned = scanImports(text, moduleName, isPackage).sort();
        if (model.errors === 0) expect(scanned, `${fixture.label} ${file.rel}`).toEqual(model.modules);
        else expect(scanned, `${fixture.label} ${file.rel}`).toEqual(expect.arrayContaining(model.modules));
        files++;
      }
    }
    recordCount('import scan: fixture files compared with the parser', files);
    expect(files).toBeGreaterThan(150);
  });

  it('on mutated fixtures: every import the parser finds, the scan finds too (all of them in valid code)', async () => {
    const parser = await getParser();
    const texts = allFixtures().flatMap((f) => f.files.filter((x) => x.rel.endsWith('.py')).map((x) => x.text));
    let tried = 0;
    fc.assert(
      fc.property(fc.nat(texts.length - 1), fc.nat(), fc.nat(), fc.constantFrom('delete-line', 'duplicate-line', 'cut', 'quote', 'bracket'), (which, a, b, how) => {
        const text = texts[which]!;
        const lines = text.split('\n');
        const line = a % lines.length;
        const at = b % (text.length + 1);
        const mutated =
          how === 'delete-line'
            ? [...lines.slice(0, line), ...lines.slice(line + 1)].join('\n')
            : how === 'duplicate-line'
              ? [...lines.slice(0, line + 1), ...lines.slice(line)].join('\n')
              : how === 'cut'
                ? text.slice(0, at)
                : `${text.slice(0, at)}${how === 'quote' ? '"' : '('}${text.slice(at)}`;
        tried++;
        const model = modelImports(parser, mutated, 'lab.train', false);
        const scanned = scanImports(mutated, 'lab.train', false).sort();
        // Valid code: exactly the parser's imports. Broken code: at least every import statement the parser still
        // reads whole at the start of a line (the scan may find more).
        if (model.errors === 0) expect(scanned).toEqual(model.modules);
        else expect(scanned).toEqual(expect.arrayContaining(model.clean));
      }),
      { numRuns: runs(300, 3000), seed: seed() },
    );
    recordCount('import scan: mutated texts compared with the parser', tried);
  });
});
