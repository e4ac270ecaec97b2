// No recursion can overflow the stack: every deep shape (3,000-deep expressions, 300-deep blocks) goes through the
// parser, the semantic model and every rule without an internal error; and a static audit keeps every recursive
// function of the analysis bounded.
import * as fs from 'node:fs';
import * as path from 'node:path';
import ts from 'typescript';
import { describe, expect, it } from 'vitest';
import { checkInOrder, expectSane } from './engine-checks';
import { DEPTH, deepShapes } from './deep-shapes';
import { recordCount, REPO, STRESS } from './fixtures';

describe(`${DEPTH}-deep inputs through the engine`, () => {
  const shapes = deepShapes();
  for (const shape of shapes) {
    it(`analyses ${shape.name} with every rule and no internal error`, async () => {
      // A few shapes are quadratic for some rule (each of 3,000 nested loops scans its body): a per-rule budget keeps
      // `npm test` short; the deepest recursion starts at the outermost node, which preorder visits first.
      const reports = await checkInOrder([{ rel: 'deep.py', text: shape.text }], [0], { budgetMs: STRESS ? undefined : 4000 });
      expectSane(reports, shape.name);
      // Either the whole file was analysed, or the budget stopped it with a note (never a crash).
      const notes = reports[0]!.notes.map((n) => n.kind);
      expect(notes.every((k) => k === 'syntax' || k === 'budget')).toBe(true);
    }, 120_000);
  }
  it('counts the shapes', () => {
    recordCount('deep shapes analysed', shapes.length);
    expect(shapes.length).toBeGreaterThan(30);
  });
});

/**
 * Recursive functions of the analysis whose depth is bounded by something other than a depth parameter, with the
 * bound. Any other function that calls itself must take a depth (or level) parameter.
 */
const BOUNDED_OTHERWISE: Record<string, string> = {
  'server/src/cli/files.ts:walk': 'folder depth, bounded by PATH_MAX; folders already searched (links) are skipped',
  'server/src/semantic/queries.ts:visit': 'class ancestry, bounded by MAX_DEPTH through its depth argument',
  'rules/unbounded-noise-rate/normal-cdf.ts:erfc': 'a numeric identity, one level (erfc(-x) = 2 - erfc(x))',
  'rules/unbounded-noise-rate/rule.ts:isOddsForm': 'one level: the log form checks its argument in the plain form, which does not recurse',
};

/** Self-recursive functions (direct calls by name, or `this.name(...)` inside method `name`) of a TypeScript file. */
function selfRecursive(file: string): { name: string; params: string[] }[] {
  const source = ts.createSourceFile(file, fs.readFileSync(file, 'utf8'), ts.ScriptTarget.Latest, true);
  const out = new Map<string, string[]>();
  const stack: { name: string; params: string[] }[] = [];
  const visit = (node: ts.Node): void => {
    let pushed = false;
    let name: string | null = null;
    let params: readonly ts.ParameterDeclaration[] = [];
    if ((ts.isFunctionDeclaration(node) || ts.isMethodDeclaration(node)) && node.name) {
      name = node.name.getText(source);
      params = node.parameters;
    } else if ((ts.isArrowFunction(node) || ts.isFunctionExpression(node)) && ts.isVariableDeclaration(node.parent)) {
      name = node.parent.name.getText(source);
      params = node.parameters;
    }
    if (name !== null) {
      stack.push({ name, params: params.map((p) => p.name.getText(source)) });
      pushed = true;
    }
    if (ts.isCallExpression(node)) {
      const callee = node.expression;
      const called = ts.isIdentifier(callee) ? callee.text : ts.isPropertyAccessExpression(callee) && callee.expression.kind === ts.SyntaxKind.ThisKeyword ? callee.name.text : null;
      const owner = called === null ? undefined : [...stack].reverse().find((f) => f.name === called);
      if (owner) out.set(owner.name, owner.params);
    }
    ts.forEachChild(node, visit);
    if (pushed) stack.pop();
  };
  visit(source);
  return [...out].map(([n, p]) => ({ name: n, params: p }));
}

function typeScriptFiles(dir: string): string[] {
  const out: string[] = [];
  for (const entry of fs.readdirSync(dir, { withFileTypes: true })) {
    const full = path.join(dir, entry.name);
    if (entry.isDirectory()) out.push(...typeScriptFiles(full));
    else if (entry.name.endsWith('.ts') && !entry.name.endsWith('.d.ts')) out.push(full);
  }
  return out.sort();
}

describe('recursion audit', () => {
  it('finds no self-recursive function of the analysis without a depth bound', () => {
    const unbounded: string[] = [];
    let audited = 0;
    for (const file of [...typeScriptFiles(path.join(REPO, 'server', 'src')), ...typeScriptFiles(path.join(REPO, 'rules'))]) {
      const rel = path.relative(REPO, file).split(path.sep).join('/');
      for (const fn of selfRecursive(file)) {
        audited++;
        const key = `${rel}:${fn.name}`;
        if (fn.params.some((p) => /depth|level/i.test(p)) || key in BOUNDED_OTHERWISE) continue;
        unbounded.push(key);
      }
    }
    expect(unbounded, 'make these iterative, give them a depth bound, or explain the bound in BOUNDED_OTHERWISE').toEqual([]);
    expect(audited).toBeGreaterThan(20);
  });

  it('lists no function as bounded otherwise that no longer recurses (the list stays honest)', () => {
    const recursive = new Set<string>();
    for (const file of [...typeScriptFiles(path.join(REPO, 'server', 'src')), ...typeScriptFiles(path.join(REPO, 'rules'))]) {
      const rel = path.relative(REPO, file).split(path.sep).join('/');
      for (const fn of selfRecursive(file)) recursive.add(`${rel}:${fn.name}`);
    }
    expect(Object.keys(BOUNDED_OTHERWISE).filter((k) => !recursive.has(k))).toEqual([]);
  });
});
