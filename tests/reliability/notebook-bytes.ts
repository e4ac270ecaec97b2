// Where the cells' `source` values lie in a notebook's JSON text, found independently of the tool's own scanner, so
// that tests can compare every byte outside them.

/** The end of the JSON value that starts at `at` (a string, array, object or scalar). */
export function jsonValueEnd(raw: string, at: number): number {
  let i = at;
  let depth = 0;
  do {
    const c = raw[i]!;
    if (c === '"') {
      i++;
      while (raw[i] !== '"') i += raw[i] === '\\' ? 2 : 1;
    } else if (c === '[' || c === '{') depth++;
    else if (c === ']' || c === '}') depth--;
    else if (depth === 0 && /[-\w.+]/.test(c)) {
      while (/[-\w.+]/.test(raw[i + 1] ?? '')) i++;
    }
    i++;
  } while (depth > 0);
  return i;
}

/**
 * Offsets of the `source` value of each cell, in order, found by the `"source":` keys (a quote inside a JSON string
 * is escaped, so the pattern cannot match inside one). Valid for notebooks whose cells each have one `source` key and
 * whose outputs and metadata have none.
 */
export function sourceValueSpans(raw: string): { start: number; end: number }[] {
  const out: { start: number; end: number }[] = [];
  const key = /(^|[\s,{])"source"\s*:\s*/g;
  for (let m = key.exec(raw); m; m = key.exec(raw)) {
    const start = m.index + m[0].length;
    out.push({ start, end: jsonValueEnd(raw, start) });
  }
  return out;
}
