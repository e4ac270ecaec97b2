// Constant folding for simple expressions (literals, arithmetic, names bound once, a few math functions, dict
// and list literals), so that rule messages can state numbers computed from the code.
import type { SyntaxNode } from '../parse/syntax';
import { unwrapParens } from './module';

/** A folded constant. */
export type ConstantValue = number | string | boolean;

/** How the folder follows names and calls (supplied by the semantic queries). */
export interface FoldEnvironment {
  /** The single expression an identifier is bound to, or null when unknown or ambiguous. */
  resolve(identifier: SyntaxNode): SyntaxNode | null;
  /** Qualified name of a callee (`math.log`). */
  qualifiedName(expr: SyntaxNode): string | null;
}

const MATH: Record<string, (x: number) => number> = {
  'math.log': Math.log,
  'math.exp': Math.exp,
  'math.sqrt': Math.sqrt,
  'math.log1p': Math.log1p,
  'numpy.log': Math.log,
  'numpy.exp': Math.exp,
  'numpy.sqrt': Math.sqrt,
  'builtins.abs': Math.abs,
  'builtins.float': (x) => x,
};

const MAX_DEPTH = 24;

/** Folds an expression to a constant, or null. */
export function foldConstant(expr: SyntaxNode, env: FoldEnvironment, depth = 0): ConstantValue | null {
  if (depth > MAX_DEPTH) return null;
  const node = unwrapParens(expr);
  switch (node.type) {
    case 'integer': {
      const text = node.text.replace(/_/g, '').replace(/[lLjJ]$/, '');
      const value = /^0[xX]/.test(text) ? parseInt(text.slice(2), 16) : /^0[oO]/.test(text) ? parseInt(text.slice(2), 8) : /^0[bB]/.test(text) ? parseInt(text.slice(2), 2) : Number(text);
      return Number.isFinite(value) ? value : null;
    }
    case 'float': {
      const value = Number(node.text.replace(/_/g, ''));
      return Number.isFinite(value) ? value : null;
    }
    case 'true':
      return true;
    case 'false':
      return false;
    case 'string': {
      if (node.children.some((c) => c.type === 'interpolation')) return null;
      const content = node.children.filter((c) => c.type === 'string_content').map((c) => c.text);
      return content.join('');
    }
    case 'identifier': {
      const bound = env.resolve(node);
      return bound ? foldConstant(bound, env, depth + 1) : null;
    }
    case 'unary_operator': {
      const value = foldConstant(node.child('argument') ?? node, env, depth + 1);
      if (typeof value !== 'number') return null;
      const op = node.child('operator')?.text;
      return op === '-' ? -value : op === '+' ? value : op === '~' ? ~value : null;
    }
    case 'binary_operator': {
      const left = foldConstant(node.child('left') ?? node, env, depth + 1);
      const right = foldConstant(node.child('right') ?? node, env, depth + 1);
      if (typeof left !== 'number' || typeof right !== 'number') return null;
      const op = node.child('operator')?.text;
      let out: number;
      switch (op) {
        case '+':
          out = left + right;
          break;
        case '-':
          out = left - right;
          break;
        case '*':
          out = left * right;
          break;
        case '/':
          if (right === 0) return null;
          out = left / right;
          break;
        case '//':
          if (right === 0) return null;
          out = Math.floor(left / right);
          break;
        case '%':
          if (right === 0) return null;
          out = ((left % right) + right) % right;
          break;
        case '**':
          out = left ** right;
          break;
        default:
          return null;
      }
      return Number.isFinite(out) ? out : null;
    }
    case 'call': {
      const fn = node.child('function');
      const args = node.child('arguments')?.namedChildren ?? [];
      if (!fn || args.length !== 1 || args[0]!.type === 'keyword_argument') return null;
      const name = env.qualifiedName(fn);
      if (name === 'builtins.int') {
        const v = foldConstant(args[0]!, env, depth + 1);
        return typeof v === 'number' ? Math.trunc(v) : typeof v === 'string' && /^\s*-?\d+\s*$/.test(v) ? Number(v) : null;
      }
      if (name === 'builtins.len') {
        const target = resolveLiteral(args[0]!, env, depth);
        if (target && (target.type === 'list' || target.type === 'tuple')) return target.namedChildren.length;
        return null;
      }
      const f = name ? MATH[name] : undefined;
      if (!f) return null;
      const v = foldConstant(args[0]!, env, depth + 1);
      if (typeof v !== 'number') return null;
      const out = f(v);
      return Number.isFinite(out) ? out : null;
    }
    case 'subscript': {
      const container = resolveLiteral(node.child('value') ?? node, env, depth);
      const key = foldConstant(node.child('subscript') ?? node, env, depth + 1);
      if (!container || key === null) return null;
      if (container.type === 'dictionary') {
        for (const pair of container.namedChildren) {
          if (pair.type !== 'pair') continue;
          const k = foldConstant(pair.child('key') ?? pair, env, depth + 1);
          if (k === key) return foldConstant(pair.child('value') ?? pair, env, depth + 1);
        }
        return null;
      }
      if ((container.type === 'list' || container.type === 'tuple') && typeof key === 'number') {
        const items = container.namedChildren;
        const item = items[key < 0 ? items.length + key : key];
        return item ? foldConstant(item, env, depth + 1) : null;
      }
      return null;
    }
    default:
      return null;
  }
}

/** Follows names to a literal container (dict, list, tuple). */
function resolveLiteral(expr: SyntaxNode, env: FoldEnvironment, depth: number): SyntaxNode | null {
  let node = unwrapParens(expr);
  for (let i = 0; i < 8 && node.type === 'identifier'; i++) {
    const bound = env.resolve(node);
    if (!bound) return null;
    node = unwrapParens(bound);
  }
  if (depth > MAX_DEPTH) return null;
  return node.type === 'dictionary' || node.type === 'list' || node.type === 'tuple' ? node : null;
}

/** Formats a number for a message: integers with thin grouping (48,000), others with 4 significant digits. */
export function formatNumber(value: number): string {
  if (!Number.isFinite(value)) return String(value);
  if (Number.isInteger(value) && Math.abs(value) < 1e15) return value.toLocaleString('en-US');
  const abs = Math.abs(value);
  if (abs >= 1000) return Math.round(value).toLocaleString('en-US');
  if (abs >= 0.001) return String(Number(value.toPrecision(4)));
  return value.toExponential(3);
}
