// The modules a Python file imports, read from its text with a small tokenizer instead of a full parse, so that the
// workspace knows who imports whom (and which files can call into which) before, and without, analysing any file.
// The scan finds every import statement the parser finds: it knows strings, comments, brackets and line
// continuations, and treats every place a statement can begin (a new logical line, after `;`, after a `:` outside
// brackets) as a possible `import` / `from`. Where broken code leaves it unsure it reports more imports rather than
// fewer, since an extra edge in the import graph costs a little time and a missing one would hide a caller.

/** Characters that may continue an identifier (PEP 3131, close enough for module names). */
const IDENT_REST = /[\p{L}\p{Nl}\p{Mn}\p{Mc}\p{Nd}\p{Pc}]/u;
const IDENT_START = /[\p{L}\p{Nl}_]/u;

/** True for an ASCII letter, digit or underscore (the common case, tested without a regular expression). */
function asciiWord(c: number): boolean {
  return (c >= 97 && c <= 122) || (c >= 65 && c <= 90) || (c >= 48 && c <= 57) || c === 95;
}

/** The end of the identifier that starts at `i` (whose first character is known to start one). */
function identifierEnd(text: string, i: number): number {
  const n = text.length;
  let j = i;
  while (j < n) {
    const c = text.charCodeAt(j);
    if (c < 128) {
      if (!asciiWord(c)) break;
      j++;
      continue;
    }
    const next = String.fromCodePoint(text.codePointAt(j)!);
    if (!IDENT_REST.test(next)) break;
    j += next.length;
  }
  return j;
}

/** Whether an identifier starts at `i`: ASCII letters and `_` directly, other characters by their Unicode class. */
function startsIdentifier(text: string, i: number): boolean {
  const c = text.charCodeAt(i);
  if (c < 128) return (c >= 97 && c <= 122) || (c >= 65 && c <= 90) || c === 95;
  return IDENT_START.test(String.fromCodePoint(text.codePointAt(i)!));
}

type Token = { kind: 'name'; text: string; end: number } | { kind: 'op'; text: string; end: number } | { kind: 'end'; end: number };

/**
 * Module names a file imports, as the semantic model records them (`import a.b` → `a.b`; `from m import x` →
 * `m` and `m.x`; relative imports resolved against the file's module name), in order of first appearance.
 */
export function scanImports(text: string, moduleName: string, isPackage: boolean): string[] {
  const out = new Set<string>();
  const n = text.length;
  let i = 0;
  let depth = 0;
  let statementStart = true;
  let lineStart = true;
  while (i < n) {
    const c = text.charCodeAt(i);
    if (c === 10 /* \n */) {
      if (depth === 0) statementStart = true;
      lineStart = true;
      i++;
      continue;
    }
    if (c === 32 || c === 9 || c === 13 || c === 12) {
      i++;
      continue;
    }
    if (c === 35 /* # */) {
      while (i < n && text.charCodeAt(i) !== 10) i++;
      continue;
    }
    if (c === 92 /* \ */) {
      // A line continuation (or a stray backslash): the logical line goes on.
      i += text.charCodeAt(i + 1) === 13 && text.charCodeAt(i + 2) === 10 ? 3 : 2;
      continue;
    }
    if (c === 34 || c === 39) {
      const end = skipString(text, i);
      // An unterminated string is a stray quote to the parser's error recovery, which reads on after it.
      if (end < 0) i++;
      else {
        i = end;
        statementStart = false;
        lineStart = false;
      }
      continue;
    }
    if (c === 40 || c === 91 || c === 123) {
      depth++;
      statementStart = false;
      lineStart = false;
      i++;
      continue;
    }
    if (c === 41 || c === 93 || c === 125) {
      if (depth > 0) depth--;
      statementStart = false;
      lineStart = false;
      i++;
      continue;
    }
    if (c === 59 /* ; */ || (c === 58 /* : */ && depth === 0)) {
      // `a = 1; import b`, `if flag: import c` (and annotations, where no import can follow).
      statementStart = depth === 0;
      lineStart = false;
      i++;
      continue;
    }
    if (startsIdentifier(text, i)) {
      const start = i;
      i = identifierEnd(text, i);
      // A string prefix (`rb'…'`, `f"…"`) belongs to the string.
      if (i < n && (text.charCodeAt(i) === 34 || text.charCodeAt(i) === 39) && /^[rRbBuUfFtT]{1,2}$/.test(text.slice(start, i))) {
        const end = skipString(text, i);
        i = end < 0 ? i + 1 : end;
        statementStart = false;
        lineStart = false;
        continue;
      }
      const word = text.slice(start, i);
      // A line that starts with `import` / `from` inside brackets is a bracket left open (half-typed code): the
      // parser recovers and reads the import, and so does the scan (in valid code neither keyword starts a line there).
      if (lineStart && depth > 0 && (word === 'import' || word === 'from')) depth = 0;
      if ((statementStart || lineStart) && depth === 0 && (word === 'import' || word === 'from')) {
        i = word === 'import' ? readImport(text, i, out) : readFrom(text, i, out, moduleName, isPackage);
      }
      statementStart = false;
      lineStart = false;
      continue;
    }
    statementStart = false;
    lineStart = false;
    i += c >= 0xd800 && c <= 0xdbff ? 2 : 1;
  }
  return [...out];
}

/** The position after the string literal whose opening quote is at `i`, or -1 when it is not terminated. */
function skipString(text: string, i: number): number {
  const quote = text.charCodeAt(i);
  const triple = text.charCodeAt(i + 1) === quote && text.charCodeAt(i + 2) === quote;
  let j = i + (triple ? 3 : 1);
  while (j < text.length) {
    const c = text.charCodeAt(j);
    if (c === 92) {
      j += 2;
      continue;
    }
    if (c === quote) {
      if (!triple) return j + 1;
      if (text.charCodeAt(j + 1) === quote && text.charCodeAt(j + 2) === quote) return j + 3;
    } else if (c === 10 && !triple) {
      return -1;
    }
    j++;
  }
  return -1;
}

/** The next token of an import statement: inside parentheses line breaks and comments are blanks. */
function token(text: string, i: number, inParens: boolean): Token {
  const n = text.length;
  while (i < n) {
    const c = text.charCodeAt(i);
    if (c === 32 || c === 9 || c === 12 || c === 13) i++;
    else if (c === 92 && (text.charCodeAt(i + 1) === 10 || (text.charCodeAt(i + 1) === 13 && text.charCodeAt(i + 2) === 10))) i += text.charCodeAt(i + 1) === 10 ? 2 : 3;
    else if (inParens && c === 10) i++;
    else if (inParens && c === 35) while (i < n && text.charCodeAt(i) !== 10) i++;
    else break;
  }
  if (i >= n) return { kind: 'end', end: i };
  if (startsIdentifier(text, i)) {
    const j = identifierEnd(text, i);
    return { kind: 'name', text: text.slice(i, j), end: j };
  }
  const ch = String.fromCodePoint(text.codePointAt(i)!);
  if (ch === '\n' || ch === ';' || ch === '#') return { kind: 'end', end: i };
  return { kind: 'op', text: ch, end: i + 1 };
}

/** A dotted name starting at `i` (`a . b . c`), or null; `end` is where it stops. */
function dotted(text: string, i: number, inParens: boolean): { name: string; end: number } | null {
  const first = token(text, i, inParens);
  if (first.kind !== 'name') return null;
  let name = first.text;
  let end = first.end;
  for (;;) {
    const dot = token(text, end, inParens);
    if (dot.kind !== 'op' || dot.text !== '.') break;
    const part = token(text, dot.end, inParens);
    if (part.kind !== 'name') break;
    name += `.${part.text}`;
    end = part.end;
  }
  return { name, end };
}

/** Skips an `as alias` after an imported name. */
function skipAlias(text: string, i: number, inParens: boolean): number {
  const as = token(text, i, inParens);
  if (as.kind !== 'name' || as.text !== 'as') return i;
  const alias = token(text, as.end, inParens);
  return alias.kind === 'name' ? alias.end : as.end;
}

/** `import a.b as c, d` after the keyword. */
function readImport(text: string, i: number, out: Set<string>): number {
  let at = i;
  for (;;) {
    const item = dotted(text, at, false);
    if (!item) return at;
    out.add(item.name);
    at = skipAlias(text, item.end, false);
    const comma = token(text, at, false);
    if (comma.kind !== 'op' || comma.text !== ',') return at;
    at = comma.end;
  }
}

/** `from .m import x as y, z` / `from m import (x, y)` / `from m import *` after the keyword. */
function readFrom(text: string, i: number, out: Set<string>, moduleName: string, isPackage: boolean): number {
  let at = i;
  let dots = 0;
  for (;;) {
    const t = token(text, at, false);
    if (t.kind !== 'op' || t.text !== '.') break;
    dots++;
    at = t.end;
  }
  const next = token(text, at, false);
  const module = next.kind === 'name' && next.text === 'import' ? null : dotted(text, at, false);
  if (module) at = module.end;
  if (dots === 0 && !module) return at;
  // `from __future__ import …` switches on language features; it imports no module.
  if (dots === 0 && module!.name === '__future__') return at;
  const base = dots > 0 ? relativeModuleName(moduleName, isPackage, dots, module?.name ?? '') : module!.name;
  const keyword = token(text, at, false);
  if (keyword.kind !== 'name' || keyword.text !== 'import') return at;
  out.add(base);
  at = keyword.end;
  let open = token(text, at, false);
  const inParens = open.kind === 'op' && open.text === '(';
  if (inParens) at = open.end;
  else if (open.kind === 'op' && open.text === '*') return open.end;
  for (;;) {
    const item = dotted(text, at, inParens);
    if (!item) break;
    out.add(base ? `${base}.${item.name}` : item.name);
    at = skipAlias(text, item.end, inParens);
    open = token(text, at, inParens);
    if (open.kind !== 'op' || open.text !== ',') break;
    at = open.end;
  }
  if (inParens) {
    const close = token(text, at, true);
    if (close.kind === 'op' && close.text === ')') at = close.end;
  }
  return at;
}

/** A relative import's module (`from ..a import b` in `pkg.sub.mod` → `pkg.a`), as the semantic model resolves it. */
export function relativeModuleName(moduleName: string, isPackage: boolean, dots: number, rest: string): string {
  const parts = moduleName.split('.');
  const packageParts = isPackage ? parts : parts.slice(0, -1);
  const base = packageParts.slice(0, Math.max(0, packageParts.length - (dots - 1)));
  return [...base, ...(rest ? [rest] : [])].filter(Boolean).join('.');
}
