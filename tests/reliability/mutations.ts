// Mutations of fixture texts for the property suites: the damage half-written and badly transferred files show
// (truncation, deleted and duplicated lines, random bytes, unbalanced brackets and quotes, tabs against spaces, CRLF,
// a byte-order mark), as fast-check arbitraries whose positions are fractions so one mutation fits any text.
import fc from 'fast-check';

/** One mutation; `at` and `to` are fractions of the text (or of its lines) so a mutation applies to any text. */
export type Mutation =
  | { kind: 'truncate'; at: number }
  | { kind: 'delete-line'; at: number }
  | { kind: 'duplicate-line'; at: number }
  | { kind: 'swap-lines'; at: number; to: number }
  | { kind: 'insert'; at: number; text: string }
  | { kind: 'delete-span'; at: number; length: number }
  | { kind: 'tabs'; at: number }
  | { kind: 'spaces' }
  | { kind: 'crlf' }
  | { kind: 'crlf-line'; at: number }
  | { kind: 'bom' }
  | { kind: 'indent-line'; at: number; by: string };

/** Brackets, quotes and other characters that unbalance Python's structure. */
const BREAKERS = ['(', ')', '[', ']', '{', '}', "'", '"', '"""', "'''", '\\', ':', ',', '#', '=', 'f"{', '\n', '\r', '\t', '\0', '\ufeff', '\ud800', '\udc00', 'é', '😀', ' lambda ', ' if ', 'def ', 'class ', '@', '...', ' not ', ' and '];

/** Random text: breaking characters, Python keywords and names, any UTF-16 code units (lone surrogates included). */
const insertion: fc.Arbitrary<string> = fc.oneof(
  fc.constantFrom(...BREAKERS),
  fc.constantFrom('self.sigma', 'model.eval()', 'torch.exp(', 'nn.Parameter(torch.ones(3))', 'for _ in range(10):\n    ', 'return ', 'F.softmax(', '.mean(0)', ' + kl', ' / n_train'),
  fc.string({ unit: fc.integer({ min: 0, max: 0xffff }).map((c) => String.fromCharCode(c)), maxLength: 12 }),
  fc.string({ unit: 'binary', maxLength: 8 }),
);

const fraction = fc.double({ min: 0, max: 1, noNaN: true, maxExcluded: true });

/** One mutation. */
export const mutation: fc.Arbitrary<Mutation> = fc.oneof(
  fraction.map((at): Mutation => ({ kind: 'truncate', at })),
  fraction.map((at): Mutation => ({ kind: 'delete-line', at })),
  fraction.map((at): Mutation => ({ kind: 'duplicate-line', at })),
  fc.tuple(fraction, fraction).map(([at, to]): Mutation => ({ kind: 'swap-lines', at, to })),
  fc.tuple(fraction, insertion).map(([at, text]): Mutation => ({ kind: 'insert', at, text })),
  fc.tuple(fraction, fc.integer({ min: 1, max: 40 })).map(([at, length]): Mutation => ({ kind: 'delete-span', at, length })),
  fraction.map((at): Mutation => ({ kind: 'tabs', at })),
  fc.constant<Mutation>({ kind: 'spaces' }),
  fc.constant<Mutation>({ kind: 'crlf' }),
  fraction.map((at): Mutation => ({ kind: 'crlf-line', at })),
  fc.constant<Mutation>({ kind: 'bom' }),
  fc.tuple(fraction, fc.constantFrom(' ', '  ', '    ', '\t', '        ')).map(([at, by]): Mutation => ({ kind: 'indent-line', at, by })),
);

/** One to four mutations, applied in order. */
export const mutations: fc.Arbitrary<Mutation[]> = fc.array(mutation, { minLength: 1, maxLength: 4 });

function lineIndex(lines: readonly string[], at: number): number {
  return Math.min(lines.length - 1, Math.floor(at * lines.length));
}

/** Applies one mutation to a text. */
export function applyMutation(text: string, m: Mutation): string {
  const offset = (at: number): number => Math.min(text.length, Math.floor(at * (text.length + 1)));
  const lines = text.split(/(?<=\n)/);
  switch (m.kind) {
    case 'truncate':
      return text.slice(0, offset(m.at));
    case 'delete-line': {
      if (lines.length === 0) return text;
      lines.splice(lineIndex(lines, m.at), 1);
      return lines.join('');
    }
    case 'duplicate-line': {
      if (lines.length === 0) return text;
      const i = lineIndex(lines, m.at);
      lines.splice(i, 0, lines[i]!.endsWith('\n') ? lines[i]! : `${lines[i]!}\n`);
      return lines.join('');
    }
    case 'swap-lines': {
      if (lines.length < 2) return text;
      const i = lineIndex(lines, m.at);
      const j = lineIndex(lines, m.to);
      const withBreak = (line: string): string => (line.endsWith('\n') ? line : `${line}\n`);
      [lines[i], lines[j]] = [withBreak(lines[j]!), withBreak(lines[i]!)];
      return lines.join('');
    }
    case 'insert': {
      const at = offset(m.at);
      return text.slice(0, at) + m.text + text.slice(at);
    }
    case 'delete-span': {
      const at = offset(m.at);
      return text.slice(0, at) + text.slice(at + m.length);
    }
    case 'tabs': {
      // One line's leading spaces become tabs (four per tab), mixing tabs and spaces in a block.
      if (lines.length === 0) return text;
      const i = lineIndex(lines, m.at);
      lines[i] = lines[i]!.replace(/^( {4})+/, (s) => '\t'.repeat(s.length / 4));
      return lines.join('');
    }
    case 'spaces':
      return text.replace(/\t/g, '    ');
    case 'crlf':
      return text.replace(/\r?\n/g, '\r\n');
    case 'crlf-line': {
      if (lines.length === 0) return text;
      const i = lineIndex(lines, m.at);
      lines[i] = lines[i]!.replace(/\r?\n$/, '\r\n');
      return lines.join('');
    }
    case 'bom':
      return text.startsWith('\ufeff') ? text : `\ufeff${text}`;
    case 'indent-line': {
      if (lines.length === 0) return text;
      const i = lineIndex(lines, m.at);
      lines[i] = m.by + lines[i]!;
      return lines.join('');
    }
  }
}

/** Applies mutations in order. */
export function applyMutations(text: string, list: readonly Mutation[]): string {
  return list.reduce(applyMutation, text);
}

/**
 * Mutates a notebook: either its JSON text itself (mostly no longer JSON, which must be reported, not crash) or the
 * source of one code cell inside valid JSON (what an editor produces), chosen by `inCell`.
 */
export function mutateNotebook(raw: string, list: readonly Mutation[], inCell: number | null): string {
  if (inCell === null) return applyMutations(raw, list);
  let doc: { cells?: { cell_type?: string; source?: string | string[] }[] };
  try {
    doc = JSON.parse(raw) as typeof doc;
  } catch {
    return applyMutations(raw, list);
  }
  const code = (doc.cells ?? []).filter((c) => c.cell_type === 'code');
  const cell = code[inCell % Math.max(1, code.length)];
  if (!cell) return raw;
  const source = Array.isArray(cell.source) ? cell.source.join('') : (cell.source ?? '');
  const mutated = applyMutations(source, list);
  cell.source = Array.isArray(cell.source) ? mutated.split(/(?<=\n)/) : mutated;
  return `${JSON.stringify(doc, null, 1)}\n`;
}

/** A mutated fixture: which fixture, the mutations, and for notebooks whether (and which cell) to mutate inside. */
export interface MutatedInput {
  fixture: number;
  file: number;
  mutations: Mutation[];
  notebookCell: number | null;
}

/** An input for the property suites: a fixture index, one of its files and mutations (indexes are taken modulo). */
export function mutatedInput(fixtureCount: number): fc.Arbitrary<MutatedInput> {
  return fc.record({
    fixture: fc.integer({ min: 0, max: fixtureCount - 1 }),
    file: fc.nat(),
    mutations,
    notebookCell: fc.option(fc.nat({ max: 20 }), { freq: 3 }),
  });
}
