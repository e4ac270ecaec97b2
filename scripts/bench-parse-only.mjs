// The benchmark's floor: reads every .py and .ipynb file under a folder and parses it with the same web-tree-sitter
// runtime and tree-sitter-python grammar as the CLI (server/dist/*.wasm), freeing each tree; prints one JSON line.
//
// Usage: node scripts/bench-parse-only.mjs DIR
// Output: {"files":N,"lines":N,"bytes":N,"ms":N,"readMs":N,"parseMs":N,"initMs":N}
//   ms      read + parse time of all files (what the floor is), measured inside this process;
//   initMs  loading the two wasm files (once per process), not included in ms.
// Notebooks are read as the CLI reads them: code cells joined by newlines, IPython magic and shell lines turned
// into comments of the same length (a cheap stand-in for server/src/parse/notebook.ts).
import * as fs from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');

/** Files to parse under `dir`, sorted; hidden folders and the folders the CLI never enters are skipped. */
export function listSourceFiles(dir) {
  const out = [];
  const skip = new Set(['node_modules', '__pycache__', '.venv', 'venv', '.ipynb_checkpoints']);
  const walk = (d) => {
    const entries = fs.readdirSync(d, { withFileTypes: true }).sort((a, b) => (a.name < b.name ? -1 : a.name > b.name ? 1 : 0));
    for (const e of entries) {
      if (e.name.startsWith('.') || skip.has(e.name)) continue;
      const abs = path.join(d, e.name);
      if (e.isDirectory()) walk(abs);
      else if (e.isFile() && (e.name.endsWith('.py') || e.name.endsWith('.ipynb'))) out.push(abs);
    }
  };
  walk(dir);
  return out;
}

/** A notebook's code cells joined by newlines, magic and shell lines commented out without changing lengths. */
export function notebookCode(raw) {
  const nb = JSON.parse(raw);
  const parts = [];
  for (const cell of nb.cells ?? []) {
    if (cell.cell_type !== 'code') continue;
    const src = Array.isArray(cell.source) ? cell.source.join('') : String(cell.source ?? '');
    parts.push(/[%!]/.test(src) ? src.replace(/^(\s*)[%!]/gm, '$1#') : src);
  }
  return parts.join('\n') + '\n';
}

/** Lines of a text: newline characters, plus one for a last line without a newline. */
export function countLines(text) {
  if (text.length === 0) return 0;
  let n = 0;
  for (let i = text.indexOf('\n'); i !== -1; i = text.indexOf('\n', i + 1)) n++;
  return text.endsWith('\n') ? n : n + 1;
}

async function main() {
  const dir = process.argv[2];
  if (!dir) {
    process.stderr.write('Usage: node scripts/bench-parse-only.mjs DIR\n');
    process.exit(2);
  }
  const dist = path.join(root, 'server', 'dist');
  const runtimeWasm = path.join(dist, 'web-tree-sitter.wasm');
  const grammarWasm = path.join(dist, 'tree-sitter-python.wasm');
  for (const f of [runtimeWasm, grammarWasm]) {
    if (!fs.existsSync(f)) {
      process.stderr.write(`bench-parse-only: ${path.relative(process.cwd(), f)} is missing; run npm run build first\n`);
      process.exit(2);
    }
  }
  const t0 = performance.now();
  const { Parser, Language } = await import(pathToFileURL(path.join(root, 'node_modules', 'web-tree-sitter', 'web-tree-sitter.js')).href);
  await Parser.init({ locateFile: () => runtimeWasm });
  const language = await Language.load(grammarWasm);
  const parser = new Parser();
  parser.setLanguage(language);
  const initMs = performance.now() - t0;

  const files = listSourceFiles(path.resolve(dir));
  let lines = 0;
  let bytes = 0;
  let readMs = 0;
  let parseMs = 0;
  const start = performance.now();
  for (const file of files) {
    const r0 = performance.now();
    const raw = fs.readFileSync(file, 'utf8');
    const text = file.endsWith('.ipynb') ? notebookCode(raw) : raw;
    const r1 = performance.now();
    const tree = parser.parse(text);
    tree.delete();
    parseMs += performance.now() - r1;
    readMs += r1 - r0;
    lines += countLines(text);
    bytes += Buffer.byteLength(raw);
  }
  const ms = performance.now() - start;
  parser.delete();
  const round = (x) => Math.round(x * 10) / 10;
  process.stdout.write(JSON.stringify({ files: files.length, lines, bytes, ms: round(ms), readMs: round(readMs), parseMs: round(parseMs), initMs: round(initMs) }) + '\n');
}

if (process.argv[1] && path.resolve(process.argv[1]) === fileURLToPath(import.meta.url)) {
  await main();
}
