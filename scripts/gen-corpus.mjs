// Generates a deterministic benchmark corpus of training code (packages of Python modules and some notebooks)
// from the project's own Python sources, with every project-defined identifier renamed from a seeded PRNG.
//
// Usage: node scripts/gen-corpus.mjs --lines N [--seed S] --out DIR [--verify] [--quiet]
//
// The sources are read at run time (test-workspaces/**/*.py|ipynb, rules/*/cases/**/*.py, tests/corpus/**/*.py|ipynb);
// nothing is copied into committed files. Each source group (files linked by local imports) is instantiated many
// times with a fresh renaming; the renamed files are concatenated into modules of 100–1,500 lines inside packages,
// and a local import becomes a relative (or absolute) import between the generated modules, so the corpus has
// cross-file classes and functions. About 5% of the files are nbformat-4 notebooks.
//
// What is renamed: names that the sources bind (functions, classes, parameters, assignment/loop/with/except/
// comprehension targets, `self.x` attributes, methods, class-body fields). What is never renamed: keywords,
// builtins, dunder names, every name bound by an import of an outside library and every attribute taken from one
// (torch/nn/F/dist/…), keyword arguments of calls into outside code, names called as methods that the sources do
// not define (`.std()`, `.backward()`), identifier-like string contents, and a short list of library attribute and
// hook names (weight, bias, forward, training …). So the analyser sees code that means what the sources meant.
//
// `--verify` checks the written corpus: every .py file and every notebook's code (magic lines dropped) parses with
// CPython's `ast` (python3), notebooks are nbformat 4, module sizes lie in 100–1,500 lines, and a second generation
// in memory gives byte-identical output (determinism).
import { createHash } from 'node:crypto';
import { spawnSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');

/** Bumped whenever the output for a given seed changes, so cached corpora are regenerated. */
export const GENERATOR_VERSION = 11;

const MIN_MODULE_LINES = 100;
const MAX_MODULE_LINES = 1500;
const NOTEBOOK_SHARE = 0.05;

// ---------------------------------------------------------------------------------------------------------------
// Seeded PRNG (sfc32 seeded from a cyrb128 hash of the seed string): the same numbers on every machine.

/** Returns a PRNG object with uniform floats, integers, picks and weighted picks, seeded from a string. */
export function makeRandom(seed) {
  let h1 = 1779033703;
  let h2 = 3144134277;
  let h3 = 1013904242;
  let h4 = 2773480762;
  const s = String(seed);
  for (let i = 0; i < s.length; i++) {
    const k = s.charCodeAt(i);
    h1 = h2 ^ Math.imul(h1 ^ k, 597399067);
    h2 = h3 ^ Math.imul(h2 ^ k, 2869860233);
    h3 = h4 ^ Math.imul(h3 ^ k, 951274213);
    h4 = h1 ^ Math.imul(h4 ^ k, 2716044179);
  }
  h1 = Math.imul(h3 ^ (h1 >>> 18), 597399067);
  h2 = Math.imul(h4 ^ (h2 >>> 22), 2869860233);
  h3 = Math.imul(h1 ^ (h3 >>> 17), 951274213);
  h4 = Math.imul(h2 ^ (h4 >>> 19), 2716044179);
  let a = (h1 ^ h2 ^ h3 ^ h4) >>> 0;
  let b = (h2 ^ h1) >>> 0;
  let c = (h3 ^ h1) >>> 0;
  let d = (h4 ^ h1) >>> 0;
  const next = () => {
    a >>>= 0;
    b >>>= 0;
    c >>>= 0;
    d >>>= 0;
    let t = (a + b) | 0;
    a = b ^ (b >>> 9);
    b = (c + (c << 3)) | 0;
    c = (c << 21) | (c >>> 11);
    d = (d + 1) | 0;
    t = (t + d) | 0;
    c = (c + t) | 0;
    return (t >>> 0) / 4294967296;
  };
  for (let i = 0; i < 15; i++) next();
  const rnd = {
    float: next,
    int: (lo, hi) => lo + Math.floor(next() * (hi - lo + 1)),
    chance: (p) => next() < p,
    pick: (list) => list[Math.floor(next() * list.length)],
    weighted: (list, weight) => {
      let total = 0;
      for (const item of list) total += weight(item);
      let x = next() * total;
      for (const item of list) {
        x -= weight(item);
        if (x < 0) return item;
      }
      return list[list.length - 1];
    },
    logUniform: (lo, hi) => Math.round(Math.exp(Math.log(lo) + next() * (Math.log(hi) - Math.log(lo)))),
  };
  return rnd;
}

// ---------------------------------------------------------------------------------------------------------------
// Names that are never renamed.

const KEYWORDS = new Set(
  'False None True and as assert async await break class continue def del elif else except finally for from global if import in is lambda nonlocal not or pass raise return try while with yield _ case match type print exec'.split(' '),
);
const BUILTINS = new Set(
  `ArithmeticError AssertionError AttributeError BaseException BaseExceptionGroup BlockingIOError BrokenPipeError BufferError BytesWarning ChildProcessError ConnectionAbortedError ConnectionError ConnectionRefusedError ConnectionResetError DeprecationWarning EOFError Ellipsis EncodingWarning EnvironmentError Exception ExceptionGroup FileExistsError FileNotFoundError FloatingPointError FutureWarning GeneratorExit IOError ImportError ImportWarning IndentationError IndexError InterruptedError IsADirectoryError KeyError KeyboardInterrupt LookupError MemoryError ModuleNotFoundError NameError NotADirectoryError NotImplemented NotImplementedError OSError OverflowError PendingDeprecationWarning PermissionError ProcessLookupError RecursionError ReferenceError ResourceWarning RuntimeError RuntimeWarning StopAsyncIteration StopIteration SyntaxError SyntaxWarning SystemError SystemExit TabError TimeoutError TypeError UnboundLocalError UnicodeDecodeError UnicodeEncodeError UnicodeError UnicodeTranslateError UnicodeWarning UserWarning ValueError Warning ZeroDivisionError abs aiter all anext any ascii bin bool breakpoint bytearray bytes callable chr classmethod compile complex copyright credits delattr dict dir divmod enumerate eval exec exit filter float format frozenset getattr globals hasattr hash help hex id input int isinstance issubclass iter len license list locals map max memoryview min next object oct open ord pow print property quit range repr reversed round set setattr slice sorted staticmethod str sum super tuple type vars zip self cls`.split(
    /\s+/,
  ),
);
/**
 * Attribute, keyword and hook names of the libraries the sources use (torch, pyro, TensorFlow/Keras, flax) that a
 * project class may also assign or define; renaming them would change what the code means (from memory of those APIs).
 */
const LIBRARY_NAMES = new Set(
  `weight bias data grad shape T loc scale training device dtype ndim requires_grad mean stddev variance batch_shape event_shape
   forward call build setup reset_parameters extra_repr get_config compute_output_shape model guide trainable_variables
   variables kernel params state_dict parameters named_parameters modules children buffers train eval to cuda cpu
   step zero_grad backward item detach numpy size sample rsample log_prob entropy support arg_constraints
   has_rsample expand mode name inputs outputs input_shape features dim axis keepdim out
   fit compile predict evaluate summary add add_loss add_weight losses layers optimizer history`.split(/\s+/),
);

/**
 * Names the analyser itself gives a meaning by their spelling: the identifier strings of every `…NAMES…` constant
 * list in server/src and rules (dataset-size, batch-size and batch-count names, KL method names …), read when the
 * generator runs so the list follows the rules. Renaming them would change what the analyser concludes.
 */
export function analyserNames() {
  const out = new Set();
  const walk = (dir) => {
    let entries;
    try {
      entries = fs.readdirSync(dir, { withFileTypes: true });
    } catch {
      return;
    }
    for (const e of entries) {
      const abs = path.join(dir, e.name);
      if (e.isDirectory() && e.name !== 'node_modules' && e.name !== 'cases') walk(abs);
      else if (e.isFile() && e.name.endsWith('.ts') && !e.name.endsWith('.test.ts')) {
        const text = fs.readFileSync(abs, 'utf8');
        for (const m of text.matchAll(/const\s+[A-Z][A-Z0-9_]*NAMES[A-Z0-9_]*\s*(?::[^=]+)?=\s*(?:new Set\()?\[([\s\S]*?)\]/g)) {
          for (const q of m[1].matchAll(/['"]([A-Za-z_][A-Za-z0-9_]*)['"]/g)) out.add(q[1]);
        }
      }
    }
  };
  walk(path.join(root, 'server', 'src'));
  walk(path.join(root, 'rules'));
  return [...out].sort();
}

function isDunder(name) {
  return name.length > 4 && name.startsWith('__') && name.endsWith('__');
}

// ---------------------------------------------------------------------------------------------------------------
// Invented vocabulary for new names (the product's scenario: river gauges, pump bearings, soil moisture, leaf spectra).

const WORDS = `river stage gauge weir rain runoff flow basin catchment reach tide crest flood levee culvert channel
  pump bearing shaft rotor impeller casing vibration fault spectrum band harmonic
  soil moisture probe drift depth horizon loam clay silt infiltration
  leaf canopy spectra reflectance chlorophyll stomata petiole blade
  station sensor logger reading window record batch sweep epoch fold split shard
  prior posterior guide draw sample noise spread width mass weight trace chain sweep ensemble member
  mean offset jitter tempo lag delay horizon season anomaly trend residual cutoff margin floor ceiling
  encoder decoder head stem block cell gate unit layer tower branch mixer bridge adapter
  north south upper lower inner outer early late coarse fine raw clean smooth sparse dense
  alpha beta gamma delta kappa theta omega zeta
  count rate ratio level limit budget step total score factor index table frame grid map`
  .split(/\s+/)
  .filter((w, i, all) => w && all.indexOf(w) === i);
const SHORT = 'abcdefghjkmnpqrstuvwxyz'.split('');

function capitalise(word) {
  return word[0].toUpperCase() + word.slice(1);
}

// ---------------------------------------------------------------------------------------------------------------
// Parsing with the same web-tree-sitter and grammar as the CLI.

async function loadParser() {
  const dist = path.join(root, 'server', 'dist');
  const runtime = fs.existsSync(path.join(dist, 'web-tree-sitter.wasm')) ? path.join(dist, 'web-tree-sitter.wasm') : path.join(root, 'node_modules', 'web-tree-sitter', 'web-tree-sitter.wasm');
  const grammar = fs.existsSync(path.join(dist, 'tree-sitter-python.wasm')) ? path.join(dist, 'tree-sitter-python.wasm') : path.join(root, 'node_modules', 'tree-sitter-python', 'tree-sitter-python.wasm');
  const { Parser, Language } = await import(pathToFileURL(path.join(root, 'node_modules', 'web-tree-sitter', 'web-tree-sitter.js')).href);
  await Parser.init({ locateFile: () => runtime });
  const language = await Language.load(grammar);
  const parser = new Parser();
  parser.setLanguage(language);
  return parser;
}

/** A plain copy of the tree-sitter tree (type, field, offsets, children), so the WASM tree can be freed at once. */
function copyTree(tree) {
  const cursor = tree.walk();
  const rootNode = { type: cursor.nodeType, field: null, start: cursor.startIndex, end: cursor.endIndex, named: true, children: [], parent: null };
  const stack = [rootNode];
  if (cursor.gotoFirstChild()) {
    for (;;) {
      const parent = stack[stack.length - 1];
      const node = { type: cursor.nodeType, field: cursor.currentFieldName, start: cursor.startIndex, end: cursor.endIndex, named: cursor.nodeIsNamed, children: [], parent, error: cursor.nodeType === 'ERROR' || cursor.nodeIsMissing };
      parent.children.push(node);
      if (cursor.gotoFirstChild()) {
        stack.push(node);
        continue;
      }
      let done = false;
      while (!cursor.gotoNextSibling()) {
        if (!cursor.gotoParent() || stack.length === 1) {
          done = true;
          break;
        }
        stack.pop();
      }
      if (done) break;
    }
  }
  cursor.delete();
  return rootNode;
}

function* descendants(node) {
  const stack = [node];
  while (stack.length) {
    const n = stack.pop();
    yield n;
    for (let i = n.children.length - 1; i >= 0; i--) stack.push(n.children[i]);
  }
}

function hasError(node) {
  for (const n of descendants(node)) if (n.error) return true;
  return false;
}

function childByField(node, field) {
  return node.children.find((c) => c.field === field) ?? null;
}

// ---------------------------------------------------------------------------------------------------------------
// Reading the sources.

const SOURCE_ROOTS = ['test-workspaces', 'rules', path.join('tests', 'corpus')];

function listSources() {
  const out = [];
  const walk = (dir, inCases) => {
    let entries;
    try {
      entries = fs.readdirSync(dir, { withFileTypes: true });
    } catch {
      return;
    }
    entries.sort((a, b) => (a.name < b.name ? -1 : a.name > b.name ? 1 : 0));
    for (const e of entries) {
      if (e.name.startsWith('.') || e.name === 'node_modules' || e.name === '__pycache__') continue;
      const abs = path.join(dir, e.name);
      const rel = path.relative(root, abs);
      if (e.isDirectory()) walk(abs, inCases || (rel.startsWith('rules' + path.sep) && e.name === 'cases'));
      else if (e.isFile()) {
        const isRules = rel.startsWith('rules' + path.sep);
        if (isRules && !inCases) continue;
        if (e.name.endsWith('.py') || (!isRules && e.name.endsWith('.ipynb'))) out.push(rel);
      }
    }
  };
  for (const r of SOURCE_ROOTS) walk(path.join(root, r), false);
  return out;
}

/** Drops the lines of the test markers (`# expect[...]`, caret lines) so the corpus reads like ordinary code. */
function dropTestMarkers(text) {
  return text
    .split('\n')
    .filter((line) => !/^\s*#.*\bexpect\[/.test(line))
    .map((line) => line.replace(/\s*#\s*(\^+\s*)?expect\[[^\]]*\].*$/, ''))
    .join('\n');
}

/** A notebook's code cells as one Python text, IPython magic and shell lines dropped. */
function notebookPython(raw) {
  const nb = JSON.parse(raw);
  const parts = [];
  for (const cell of nb.cells ?? []) {
    if (cell.cell_type !== 'code') continue;
    const src = Array.isArray(cell.source) ? cell.source.join('') : String(cell.source ?? '');
    if (/^\s*%%/.test(src)) continue;
    parts.push(
      src
        .split('\n')
        .filter((l) => !/^\s*[%!]/.test(l) && !/^[A-Za-z_][\w.]*\?\??\s*$/.test(l))
        .join('\n'),
    );
  }
  return parts.join('\n\n') + '\n';
}

// ---------------------------------------------------------------------------------------------------------------
// Analysis of one source file: imports, top-level chunks, identifier occurrences and bindings.

const IMPORT_TYPES = new Set(['import_statement', 'import_from_statement', 'future_import_statement']);
const TARGET_CONTAINERS = new Set(['pattern_list', 'tuple_pattern', 'list_pattern', 'tuple', 'list', 'list_splat_pattern', 'parenthesized_expression', 'as_pattern_target', 'expression_list']);

function dottedText(text, node) {
  return text.slice(node.start, node.end).replace(/\s+/g, '');
}

/** Parses the import statements of a module into bindings: local name → qualified meaning, plus a form for emitting. */
function readImport(text, node) {
  const result = { kind: node.type, module: null, level: 0, names: [], text: text.slice(node.start, node.end) };
  if (node.type === 'import_statement') {
    for (const c of node.children.filter((c) => c.field === 'name')) {
      if (c.type === 'aliased_import') {
        const target = dottedText(text, childByField(c, 'name'));
        result.names.push({ name: target, alias: text.slice(childByField(c, 'alias').start, childByField(c, 'alias').end), module: true });
      } else result.names.push({ name: dottedText(text, c), alias: null, module: true });
    }
    return result;
  }
  if (node.type === 'future_import_statement') {
    result.module = '__future__';
    return result;
  }
  const mod = childByField(node, 'module_name');
  if (mod.type === 'relative_import') {
    const prefix = mod.children.find((c) => c.type === 'import_prefix');
    result.level = prefix ? prefix.end - prefix.start : 0;
    const dn = mod.children.find((c) => c.type === 'dotted_name');
    result.module = dn ? dottedText(text, dn) : '';
  } else result.module = dottedText(text, mod);
  if (node.children.some((c) => c.type === 'wildcard_import')) result.names.push({ name: '*', alias: null });
  for (const c of node.children.filter((c) => c.field === 'name')) {
    if (c.type === 'aliased_import') {
      result.names.push({ name: dottedText(text, childByField(c, 'name')), alias: text.slice(childByField(c, 'alias').start, childByField(c, 'alias').end) });
    } else result.names.push({ name: dottedText(text, c), alias: null });
  }
  return result;
}

/** The names an import binds in the module, each with the qualified thing it stands for. */
function importBindings(imp) {
  const out = [];
  if (imp.kind === 'import_statement') {
    for (const n of imp.names) {
      if (n.alias) out.push([n.alias, n.name]);
      else out.push([n.name.split('.')[0], n.name.split('.')[0]]);
    }
  } else if (imp.module !== '__future__') {
    for (const n of imp.names) if (n.name !== '*') out.push([n.alias ?? n.name, `${'.'.repeat(imp.level)}${imp.module}.${n.name}`]);
  }
  return out;
}

/** Reads one source file into its parts; returns null (with a reason) when it cannot be used. */
function analyseSource(parser, rel) {
  const abs = path.join(root, rel);
  let text = fs.readFileSync(abs, 'utf8');
  if (rel.endsWith('.ipynb')) text = notebookPython(text);
  text = dropTestMarkers(text).replace(/\r\n?/g, '\n');
  // A file-wide suppression would silence every other copy concatenated into the same generated module.
  if (/#\s*noisewise:\s*allow-file\s*\[\s*[^\]\s]/.test(text)) return { skip: 'has a file-wide suppression comment, which would apply to the whole generated module' };
  if (!text.endsWith('\n')) text += '\n';
  const tree = parser.parse(text);
  const rootNode = copyTree(tree);
  tree.delete();
  if (hasError(rootNode)) return { skip: 'does not parse cleanly' };
  const file = { rel, dir: path.dirname(rel), stem: path.basename(rel).replace(/\.(py|ipynb)$/, ''), text, imports: [], chunks: [], occurrences: [], isInit: path.basename(rel) === '__init__.py' };
  let first = true;
  for (const node of rootNode.children) {
    if (!node.named) continue;
    if (IMPORT_TYPES.has(node.type)) {
      file.imports.push(readImport(text, node));
      continue;
    }
    // The module docstring of a source file is dropped: in a concatenated module it would be a stray expression.
    if (first && node.type === 'expression_statement' && node.children.length === 1 && node.children[0].type === 'string') {
      first = false;
      continue;
    }
    first = false;
    // `__all__` lists the source's own names as strings; in a concatenated, renamed module it would name nothing.
    if (node.type === 'expression_statement' && node.children[0]?.type === 'assignment' && /^__all__\b/.test(text.slice(node.start, node.end))) continue;
    file.chunks.push(node);
  }
  // Imports inside functions stay where they are: one of an outside module verbatim, one of a local module (found
  // when the groups are built) rewritten in place to the generated module that holds the copy.
  for (const chunk of file.chunks) {
    for (const n of descendants(chunk)) {
      if (IMPORT_TYPES.has(n.type)) {
        const imp = readImport(text, n);
        imp.nested = { start: n.start, end: n.end };
        n.nestedImport = imp;
        file.imports.push(imp);
      }
    }
  }
  file.rootNode = rootNode;
  return file;
}

/** Collects bindings and protections of one file into the global tables. */
function collectNames(file, tables) {
  const { text } = file;
  const t = (n) => text.slice(n.start, n.end);
  const externalBound = file.extBound;
  const bindName = (name) => {
    tables.names.add(name);
  };
  const bindParam = (name) => {
    bindName(name);
    tables.params.add(name);
  };
  const bindTarget = (node, classBody, topLevel) => {
    if (node.type === 'identifier') {
      bindName(t(node));
      if (classBody) tables.classMembers.add(t(node));
      if (topLevel) file.topNames.add(t(node));
      return;
    }
    if (node.type === 'attribute') {
      const obj = childByField(node, 'object');
      if (obj.type === 'identifier' && (t(obj) === 'self' || t(obj) === 'cls')) tables.selfAttrs.add(t(childByField(node, 'attribute')));
      return;
    }
    if (TARGET_CONTAINERS.has(node.type)) for (const c of node.children) if (c.named) bindTarget(c, classBody, topLevel);
  };
  const chainRoot = (node) => {
    let n = node;
    for (;;) {
      if (n.type === 'attribute') n = childByField(n, 'object');
      else if (n.type === 'call') n = childByField(n, 'function');
      else if (n.type === 'subscript') n = childByField(n, 'value');
      else if (n.type === 'parenthesized_expression' && n.children.length) n = n.children.find((c) => c.named) ?? n;
      else return n;
      if (!n) return null;
    }
  };
  const enclosing = (node, types) => {
    for (let n = node.parent; n; n = n.parent) if (types.includes(n.type)) return n;
    return null;
  };
  const scopeKind = (node) => {
    for (let n = node.parent; n; n = n.parent) {
      if (n.type === 'function_definition' || n.type === 'lambda' || n.type.endsWith('comprehension') || n.type === 'generator_expression') return 'function';
      if (n.type === 'class_definition') return 'class';
    }
    return 'module';
  };
  for (const imp of file.imports.filter((i) => !i.local)) {
    for (const [name, qualified] of importBindings(imp)) {
      externalBound.add(name);
      tables.protectAll.add(name);
      for (const part of qualified.split('.')) if (part) tables.protectAll.add(part);
    }
  }
  for (const chunk of file.chunks) {
    for (const n of descendants(chunk)) {
      if (n.nestedImport) continue;
      switch (n.type) {
        case 'function_definition':
        case 'class_definition': {
          const name = childByField(n, 'name');
          const kind = scopeKind(n);
          bindName(t(name));
          if (kind === 'module') file.topNames.add(t(name));
          if (kind === 'class') {
            tables.classMembers.add(t(name));
            if (n.type === 'function_definition') tables.methods.add(t(name));
          }
          if (n.type === 'class_definition') tables.classes.add(t(name));
          else tables.functions.add(t(name));
          break;
        }
        case 'parameters':
        case 'lambda_parameters':
          for (const p of n.children) {
            if (p.type === 'identifier') bindParam(t(p));
            else if (p.type === 'default_parameter' || p.type === 'typed_default_parameter') bindParam(t(childByField(p, 'name')));
            else if (p.type === 'typed_parameter' || p.type === 'list_splat_pattern' || p.type === 'dictionary_splat_pattern') {
              const id = p.children.find((c) => c.type === 'identifier' && c.field === null);
              if (id) bindParam(t(id));
            }
          }
          break;
        case 'assignment':
        case 'augmented_assignment': {
          const kind = scopeKind(n);
          const left = childByField(n, 'left');
          bindTarget(left, kind === 'class', kind === 'module');
          // A name holding what an outside library built (`model = tf.keras.Sequential(...)`): the attributes read
          // from it are that library's (`model.fit`), whatever the project calls its own methods.
          const right = childByField(n, 'right');
          if (left.type === 'identifier' && right && right.type === 'call') {
            const r = chainRoot(right);
            if (r && r.type === 'identifier' && externalBound.has(t(r))) file.extValues.add(t(left));
          }
          break;
        }
        case 'for_statement':
        case 'for_in_clause':
          bindTarget(childByField(n, 'left'), false, scopeKind(n) === 'module' && n.type === 'for_statement');
          break;
        case 'as_pattern_target': {
          bindTarget(n, false, scopeKind(n) === 'module');
          const value = n.parent.children.find((c) => c.named && c !== n);
          const r = value && value.type === 'call' ? chainRoot(value) : null;
          if (n.children.length === 1 && n.children[0].type === 'identifier' && r && r.type === 'identifier' && externalBound.has(t(r))) file.extValues.add(t(n.children[0]));
          break;
        }
        case 'named_expression':
          bindTarget(childByField(n, 'name'), false, false);
          break;
        case 'global_statement':
        case 'nonlocal_statement':
          for (const c of n.children) if (c.type === 'identifier') bindName(t(c));
          break;
        case 'case_pattern':
          for (const d of descendants(n)) if (d.type === 'identifier') tables.protectAll.add(t(d));
          break;
        case 'string': {
          for (const c of n.children) if (c.type === 'string_content' && /^[A-Za-z_]\w*$/.test(t(c))) {
            // A string naming an identifier may name an attribute (getattr, register_buffer) or a keyword (**{...}).
            tables.protectAttr.add(t(c));
            tables.protectKw.add(t(c));
          }
          break;
        }
        case 'attribute': {
          const r = chainRoot(n);
          if (r && r.type === 'identifier' && externalBound.has(t(r))) tables.protectAttr.add(t(childByField(n, 'attribute')));
          break;
        }
        default:
          break;
      }
    }
  }
}

/** Second pass: calls whose callee is outside the project protect their keyword names and method names. */
function collectCallProtections(file, tables) {
  const { text } = file;
  const externalBound = file.extBound;
  const t = (n) => text.slice(n.start, n.end);
  for (const chunk of file.chunks) {
    for (const n of descendants(chunk)) {
      if (n.type === 'attribute') {
        const obj = childByField(n, 'object');
        if (obj.type === 'identifier' && file.extValues.has(t(obj))) tables.protectAttr.add(t(childByField(n, 'attribute')));
        continue;
      }
      if (n.type !== 'call') continue;
      const fn = childByField(n, 'function');
      let project = false;
      if (fn.type === 'identifier') project = (tables.functions.has(t(fn)) || tables.classes.has(t(fn))) && !externalBound.has(t(fn));
      else if (fn.type === 'attribute') {
        const attr = t(childByField(fn, 'attribute'));
        const obj = childByField(fn, 'object');
        if (tables.methods.has(attr) || tables.functions.has(attr) || tables.classes.has(attr)) {
          project = true;
          if (obj.type === 'call' && t(childByField(obj, 'function')) === 'super') {
            // super().m(...) reaches the project only when the enclosing class has a project base class.
            let cls = n.parent;
            while (cls && cls.type !== 'class_definition') cls = cls.parent;
            const bases = cls ? childByField(cls, 'superclasses') : null;
            project = !!bases && bases.children.some((b) => b.named && b.type === 'identifier' && tables.classes.has(t(b)));
          }
        } else tables.protectAttr.add(attr);
      }
      if (!project) {
        const args = childByField(n, 'arguments');
        if (args) for (const a of args.children) if (a.type === 'keyword_argument') tables.protectKw.add(t(childByField(a, 'name')));
      }
    }
  }
}

const SCOPE_TYPES = new Set(['function_definition', 'lambda', 'class_definition', 'list_comprehension', 'set_comprehension', 'dictionary_comprehension', 'generator_expression']);

/** Identifiers bound by an assignment-like target (names only; attributes and subscripts bind nothing here). */
function targetNames(node, text, out) {
  if (node.type === 'identifier') out.add(text.slice(node.start, node.end));
  else if (TARGET_CONTAINERS.has(node.type)) for (const c of node.children) if (c.named) targetNames(c, text, out);
}

/** Parameter names of a `parameters` or `lambda_parameters` node. */
function parameterNames(params, text, out) {
  for (const p of params.children) {
    if (p.type === 'identifier') out.add(text.slice(p.start, p.end));
    else if (p.type === 'default_parameter' || p.type === 'typed_default_parameter') {
      const n = childByField(p, 'name');
      out.add(text.slice(n.start, n.end));
    } else if (p.type === 'typed_parameter' || p.type === 'list_splat_pattern' || p.type === 'dictionary_splat_pattern') {
      const id = p.children.find((c) => c.type === 'identifier' && c.field === null);
      if (id) out.add(text.slice(id.start, id.end));
    }
  }
}

/** The names a scope (function, lambda, class body or comprehension) binds itself, memoised on the node. */
function scopeLocals(scope, text) {
  if (scope.locals) return scope.locals;
  const out = new Set();
  const globals = new Set();
  if (scope.type.endsWith('comprehension') || scope.type === 'generator_expression') {
    for (const c of scope.children) if (c.type === 'for_in_clause') targetNames(childByField(c, 'left'), text, out);
  } else {
    const params = childByField(scope, 'parameters');
    if (params && scope.type !== 'class_definition') parameterNames(params, text, out);
    const body = childByField(scope, 'body');
    const stack = body ? [...body.children] : [];
    while (stack.length) {
      const n = stack.pop();
      if (n.type === 'function_definition' || n.type === 'class_definition') {
        const name = childByField(n, 'name');
        out.add(text.slice(name.start, name.end));
        continue;
      }
      if (SCOPE_TYPES.has(n.type)) continue;
      if (n.type === 'assignment' || n.type === 'augmented_assignment') targetNames(childByField(n, 'left'), text, out);
      else if (n.type === 'for_statement') targetNames(childByField(n, 'left'), text, out);
      else if (n.type === 'as_pattern_target') targetNames(n, text, out);
      else if (n.type === 'named_expression') targetNames(childByField(n, 'name'), text, out);
      else if (n.type === 'global_statement' || n.type === 'nonlocal_statement') for (const c of n.children) if (c.type === 'identifier') globals.add(text.slice(c.start, c.end));
      else if (n.nestedImport && !n.nestedImport.local) for (const [name] of importBindings(n.nestedImport)) out.add(name);
      for (const c of n.children) stack.push(c);
    }
  }
  for (const g of globals) out.delete(g);
  scope.locals = out;
  return out;
}

function inside(node, container) {
  return !!container && node.start >= container.start && node.end <= container.end;
}

/**
 * Where a bare name resolves: 'local' (a function, lambda or comprehension binds it, or a class body does and the
 * name is used directly in that body) or 'module' (the file's global scope).
 */
function resolveScope(n, name, text) {
  let passedFunction = false;
  for (let p = n.parent; p; p = p.parent) {
    if (p.type === 'function_definition' || p.type === 'lambda') {
      const params = childByField(p, 'parameters');
      const inBody = inside(n, childByField(p, 'body'));
      // Parameter names belong to the function; default values, annotations and decorators to the enclosing scope.
      let inParamName = false;
      if (params && inside(n, params)) {
        const parent = n.parent;
        inParamName = parent === params || ((parent.type === 'default_parameter' || parent.type === 'typed_default_parameter') && n.field === 'name') || ((parent.type === 'typed_parameter' || parent.type.endsWith('splat_pattern')) && n.field === null);
      }
      if (inBody || inParamName) {
        if (scopeLocals(p, text).has(name)) return 'local';
        passedFunction = true;
      }
    } else if (p.type.endsWith('comprehension') || p.type === 'generator_expression') {
      if (scopeLocals(p, text).has(name)) return 'local';
    } else if (p.type === 'class_definition') {
      if (!passedFunction && inside(n, childByField(p, 'body')) && scopeLocals(p, text).has(name)) return 'local';
    }
  }
  return 'module';
}

/**
 * Records every identifier occurrence of the body chunks with its kind (name, attr, kw) and its renaming key: the
 * plain name for attributes, keywords and names local to a function or class, `file::name` for a module-level name
 * of the file (or of the file it is imported from), so that two files of one group keep separate globals.
 */
function collectOccurrences(file) {
  const { text } = file;
  for (const chunk of file.chunks) {
    const occ = [];
    for (const n of descendants(chunk)) {
      if (n.type !== 'identifier') continue;
      let skip = false;
      for (let p = n.parent; p && p !== chunk.parent; p = p.parent) {
        if (IMPORT_TYPES.has(p.type) || p.type === 'case_pattern') {
          skip = true;
          break;
        }
      }
      if (skip) continue;
      let kind = 'name';
      if (n.parent.type === 'attribute' && n.field === 'attribute') kind = 'attr';
      else if (n.parent.type === 'keyword_argument' && n.field === 'name') kind = 'kw';
      const name = text.slice(n.start, n.end);
      let key = name;
      let unique = false;
      if (kind === 'name' && resolveScope(n, name, text) === 'module') {
        unique = true;
        if (file.topNames.has(name)) key = `${file.rel}::${name}`;
        else if (file.importKeys.has(name)) key = file.importKeys.get(name);
      }
      occ.push({ start: n.start, end: n.end, name, kind, key, unique });
    }
    occ.sort((a, b) => a.start - b.start);
    chunk.occurrences = occ;
  }
}

/** Keys of the names a file imports from other files of its group (`definingFile::name`, or its own for an alias). */
function collectImportKeys(file, byRel) {
  file.importKeys = new Map();
  file.localImports = [];
  for (const imp of file.imports) {
    if (!imp.local) continue;
    for (const n of imp.names) {
      if (n.name === '*') continue;
      const def = definingFile(imp.target, n.name, byRel);
      if (!def) continue;
      const defKey = `${def.file.rel}::${def.name}`;
      const bound = n.alias ?? n.name;
      const boundKey = bound === def.name ? defKey : `${file.rel}::${bound}`;
      file.importKeys.set(bound, boundKey);
      file.localImports.push({ defFile: def.file, defName: def.name, defKey, bound, boundKey, nested: imp.nested ?? null });
    }
  }
}

// ---------------------------------------------------------------------------------------------------------------
// Source groups: files connected by local imports, instantiated together.

function resolveLocalModule(file, imp, byRel) {
  // Relative: from file's package; absolute: a module path found in the file's folder or one of its ancestors.
  const tryPaths = [];
  if (imp.level > 0) {
    let base = file.dir;
    for (let i = 1; i < imp.level; i++) base = path.dirname(base);
    const parts = imp.module ? imp.module.split('.') : [];
    tryPaths.push(path.join(base, ...parts));
  } else if (imp.module) {
    const parts = imp.module.split('.');
    let dir = file.dir;
    for (let i = 0; i < 6; i++) {
      tryPaths.push(path.join(dir, ...parts));
      const up = path.dirname(dir);
      if (up === dir || SOURCE_ROOTS.includes(dir)) break;
      dir = up;
    }
  }
  for (const p of tryPaths) {
    if (byRel.has(p + '.py')) return byRel.get(p + '.py');
    if (byRel.has(path.join(p, '__init__.py'))) return byRel.get(path.join(p, '__init__.py'));
  }
  return null;
}

/** Finds the file of the group that defines a name (and its name there), following re-exports through local imports. */
function definingFile(file, name, byRel, seen = new Set()) {
  if (seen.has(file.rel)) return null;
  seen.add(file.rel);
  if (file.topNames.has(name)) return { file, name };
  for (const imp of file.imports) {
    if (!imp.target) continue;
    for (const n of imp.names) if ((n.alias ?? n.name) === name) return definingFile(imp.target, n.name, byRel, seen);
  }
  return null;
}

function buildGroups(files) {
  const byRel = new Map(files.map((f) => [f.rel, f]));
  const parent = new Map(files.map((f) => [f.rel, f.rel]));
  const find = (x) => (parent.get(x) === x ? x : (parent.set(x, find(parent.get(x))), parent.get(x)));
  for (const f of files) {
    for (const imp of f.imports) {
      if (imp.kind === 'future_import_statement') continue;
      const target = imp.kind === 'import_from_statement' ? resolveLocalModule(f, imp, byRel) : null;
      if (imp.level > 0 && !target) imp.unresolved = true;
      if (target) {
        imp.local = true;
        imp.target = target;
        parent.set(find(f.rel), find(target.rel));
      }
    }
  }
  const groups = new Map();
  for (const f of files) {
    const key = find(f.rel);
    if (!groups.has(key)) groups.set(key, []);
    groups.get(key).push(f);
  }
  return { groups: [...groups.values()], byRel };
}

/** Orders a group's files so that every file comes after the files it imports from. */
function topoOrder(group) {
  const out = [];
  const state = new Map();
  const visit = (f) => {
    if (state.get(f.rel) === 2) return;
    if (state.get(f.rel) === 1) return; // A cycle: keep the order found so far.
    state.set(f.rel, 1);
    for (const imp of f.imports) if (imp.target && group.includes(imp.target)) visit(imp.target);
    state.set(f.rel, 2);
    out.push(f);
  };
  for (const f of group) visit(f);
  return out;
}

// ---------------------------------------------------------------------------------------------------------------
// Renaming.

class Namer {
  constructor(rnd, forbidden) {
    this.rnd = rnd;
    this.forbidden = forbidden;
    this.globalTaken = new Set();
  }

  /** A new name in the style of `original`; `unique` names are never handed out twice in the corpus. */
  make(original, used, unique) {
    const lead = /^_*/.exec(original)[0];
    const core = original.slice(lead.length);
    const trail = core.endsWith('_') && core.length > 1 ? '_' : '';
    let style = 'snake';
    if (/^[A-Z][A-Z0-9_]*$/.test(core)) style = 'upper';
    else if (/^[A-Z]/.test(core)) style = 'camel';
    const { rnd } = this;
    for (let attempt = 0; ; attempt++) {
      let body;
      const words = (n) => Array.from({ length: n }, () => rnd.pick(WORDS));
      if (style === 'upper') body = words(unique ? 2 : rnd.int(1, 2)).join('_').toUpperCase();
      else if (style === 'camel') body = words(unique ? rnd.int(2, 3) : 2).map(capitalise).join('');
      else if (!unique && core.length <= 2) body = rnd.pick(SHORT) + (rnd.chance(0.4) ? rnd.pick(SHORT) : '') + (rnd.chance(0.2) ? String(rnd.int(0, 9)) : '');
      else if (!unique && core.length <= 6) body = rnd.pick(WORDS) + (rnd.chance(0.15) ? String(rnd.int(0, 9)) : '');
      else body = words(unique ? rnd.int(2, 3) : rnd.int(1, 2)).join('_');
      if (attempt > 20) body += String(attempt);
      const name = lead + body + trail;
      if (this.forbidden.has(name) || KEYWORDS.has(name) || BUILTINS.has(name) || used.has(name)) continue;
      if (unique && this.globalTaken.has(name)) continue;
      if (unique) this.globalTaken.add(name);
      used.add(name);
      return name;
    }
  }
}

/** One instantiation of a source group: a fresh name map shared by its files. */
class GroupInstance {
  constructor(group, namer) {
    this.group = group;
    this.namer = namer;
    this.map = new Map();
    this.used = new Set();
    this.replacements = new Map();
  }

  /**
   * The new name for a renaming key; `original` gives the style; module-level names (`unique`) are never handed out
   * twice in the corpus, so copies placed in one module cannot meet.
   */
  rename(key, original = key, unique = false) {
    let m = this.map.get(key);
    if (!m) {
      m = this.namer.make(original, this.used, unique);
      this.map.set(key, m);
    }
    return m;
  }

  /** The new name of a module-level name of a source file. */
  global(file, name) {
    return this.rename(`${file.rel}::${name}`, name, true);
  }

  /** The renamed text of one chunk. */
  chunkText(file, chunk) {
    const { text } = file;
    const edits = [];
    for (const o of chunk.occurrences) if (o.rename) edits.push({ start: o.start, end: o.end, text: this.rename(o.key, o.name, o.unique) });
    for (const [start, r] of this.replacements) if (start >= chunk.start && r.end <= chunk.end) edits.push({ start, end: r.end, text: r.text });
    edits.sort((a, b) => a.start - b.start);
    let out = '';
    let pos = chunk.start;
    for (const e of edits) {
      out += text.slice(pos, e.start) + e.text;
      pos = e.end;
    }
    return out + text.slice(pos, chunk.end);
  }

  /**
   * Sets the rewritten text of a file's nested local imports (`from .spectra import load` inside a function): an
   * import of the generated module that holds the copy, or only the alias assignments when it is the same module.
   */
  setNestedImports(file, moduleOf, from) {
    this.replacements = new Map();
    const byStatement = new Map();
    for (const li of file.localImports) {
      if (!li.nested) continue;
      let e = byStatement.get(li.nested.start);
      if (!e) byStatement.set(li.nested.start, (e = { end: li.nested.end, imports: new Map(), assigns: [] }));
      const orig = this.rename(li.defKey, li.defName, true);
      const alias = this.rename(li.boundKey, li.bound, true);
      const target = moduleOf(li.defFile);
      if (!target || !from || target === from) {
        if (alias !== orig) e.assigns.push(`${alias} = ${orig}`);
        continue;
      }
      const path = relativeImport(from, target);
      if (!e.imports.has(path)) e.imports.set(path, []);
      e.imports.get(path).push(alias === orig ? orig : `${orig} as ${alias}`);
    }
    for (const [start, e] of byStatement) {
      const parts = [...[...e.imports].map(([p, names]) => `from ${p} import ${names.join(', ')}`), ...e.assigns];
      this.replacements.set(start, { end: e.end, text: parts.length ? parts.join('; ') : 'pass' });
    }
  }
}

/**
 * Whether an occurrence is renamed, from the global tables (the same answer in every instance). A protection is
 * per kind of occurrence (bare name, attribute, keyword argument) and spreads to the kinds linked to it: a class
 * member (method, class-body field) is reached both as a name and as an attribute (and as a keyword for dataclass
 * fields); a parameter both as a name and as a keyword argument.
 */
function decideRenames(files, tables) {
  const memo = new Map();
  const protectedKinds = (name) => {
    let p = memo.get(name);
    if (p) return p;
    const all = tables.protectAll.has(name) || KEYWORDS.has(name) || BUILTINS.has(name) || isDunder(name);
    const attr0 = all || tables.protectAttr.has(name);
    const kw0 = all || tables.protectKw.has(name);
    const member = tables.classMembers.has(name);
    const param = tables.params.has(name);
    p = {
      name: all || (member && (attr0 || kw0)) || (param && kw0),
      attr: attr0 || (member && kw0),
      kw: kw0 || ((member || param) && all) || (member && attr0),
    };
    memo.set(name, p);
    return p;
  };
  const unrenamed = new Set();
  for (const f of files) {
    for (const chunk of f.chunks) {
      for (const o of chunk.occurrences) {
        const p = protectedKinds(o.name);
        if (o.kind === 'attr') o.rename = !p.attr && (tables.selfAttrs.has(o.name) || tables.classMembers.has(o.name));
        else if (o.kind === 'kw') o.rename = !p.kw && tables.names.has(o.name);
        else o.rename = !p.name && tables.names.has(o.name);
        if (!o.rename) unrenamed.add(o.name);
      }
    }
  }
  for (const f of files) for (const imp of f.imports) for (const [name, q] of importBindings(imp)) if (!imp.local) {
    unrenamed.add(name);
    for (const p of q.split('.')) unrenamed.add(p);
  }
  return unrenamed;
}

// ---------------------------------------------------------------------------------------------------------------
// Corpus assembly.

/** A generated Python module being filled. */
class ModuleBuilder {
  constructor(pkg, dirParts, name) {
    this.pkg = pkg;
    this.dirParts = dirParts;
    this.name = name;
    this.externalImports = [];
    this.importKeys = new Set();
    this.bindings = new Map();
    this.localImports = new Map();
    this.bodies = [];
    this.lines = 0;
    this.classes = [];
    this.provenance = [];
  }

  get dotted() {
    return [...this.dirParts, this.name].join('.');
  }

  compatible(file) {
    for (const imp of file.imports) {
      if (imp.local || imp.nested) continue;
      for (const [name, q] of importBindings(imp)) {
        const have = this.bindings.get(name);
        if (have !== undefined && have !== q) return false;
      }
    }
    return true;
  }

  /**
   * Hoists a file's imports of outside modules to the top of the module, leaving out the names an earlier import
   * already binds to the same thing (so the module does not import `nn` twice).
   */
  addExternalImports(file) {
    for (const imp of file.imports) {
      if (imp.local || imp.unresolved || imp.nested) continue;
      for (const [name, q] of importBindings(imp)) this.bindings.set(name, q);
      const fresh = [];
      for (const n of imp.names) {
        const key = imp.kind === 'import_statement' ? `${n.alias ?? ''}=${n.name}` : n.name === '*' ? `*${imp.text}` : `${n.alias ?? n.name}=${'.'.repeat(imp.level)}${imp.module}.${n.name}`;
        if (this.importKeys.has(key)) continue;
        this.importKeys.add(key);
        fresh.push(n);
      }
      if (imp.module === '__future__') {
        if (this.importKeys.has(imp.text)) continue;
        this.importKeys.add(imp.text);
      } else if (fresh.length === 0) continue;
      const named = (n) => (n.alias ? `${n.name} as ${n.alias}` : n.name);
      let text = imp.text;
      if (fresh.length !== imp.names.length) {
        text = imp.kind === 'import_statement' ? `import ${fresh.map(named).join(', ')}` : `from ${'.'.repeat(imp.level)}${imp.module} import ${fresh.map(named).join(', ')}`;
      }
      this.externalImports.push({ text, future: imp.module === '__future__' });
      this.lines += text.split('\n').length;
    }
  }

  render() {
    const head = [...this.externalImports.filter((i) => i.future), ...this.externalImports.filter((i) => !i.future)].map((i) => i.text);
    const parts = [];
    if (head.length) parts.push(head.join('\n'));
    if (this.localImports.size) parts.push([...this.localImports.values()].map((e) => `from ${e.from} import ${e.names.join(', ')}`).join('\n'));
    for (const b of this.bodies) parts.push(b);
    return parts.join('\n\n\n') + '\n';
  }
}

function countLines(text) {
  if (text.length === 0) return 0;
  let n = 0;
  for (let i = text.indexOf('\n'); i !== -1; i = text.indexOf('\n', i + 1)) n++;
  return text.endsWith('\n') ? n : n + 1;
}

/** Joins a file instance's chunks with the original blank lines between them (at most two). */
function renderBody(inst, file, chunks = file.chunks) {
  let out = '';
  let prevEnd = -1;
  for (const chunk of chunks) {
    if (prevEnd >= 0) {
      const gap = file.text.slice(prevEnd, chunk.start);
      const newlines = /^\s*$/.test(gap) ? Math.min(3, Math.max(1, (gap.match(/\n/g) ?? []).length)) : 3;
      out += '\n'.repeat(newlines);
    }
    out += inst.chunkText(file, chunk);
    prevEnd = chunk.end;
  }
  return out;
}

function relativeImport(from, to) {
  const a = from.dirParts;
  const b = to.dirParts;
  let common = 0;
  while (common < a.length && common < b.length && a[common] === b[common]) common++;
  const dots = '.'.repeat(a.length - common + 1);
  return dots + [...b.slice(common), to.name].join('.');
}

/**
 * Generates the corpus in memory: returns { files: Map(relPath → text), manifest }. Deterministic in (sources, seed, lines).
 */
export async function generateCorpus({ lines, seed }) {
  const parser = await loadParser();
  const rels = listSources();
  const files = [];
  const skipped = [];
  for (const rel of rels) {
    const f = analyseSource(parser, rel);
    if (f.skip) skipped.push({ rel, reason: f.skip });
    else files.push(f);
  }
  parser.delete();
  const { groups: rawGroups, byRel } = buildGroups(files);
  const tables = {
    names: new Set(),
    selfAttrs: new Set(),
    classMembers: new Set(),
    params: new Set(),
    methods: new Set(),
    functions: new Set(),
    classes: new Set(),
    protectAll: new Set(analyserNames()),
    protectAttr: new Set(LIBRARY_NAMES),
    protectKw: new Set(LIBRARY_NAMES),
  };
  for (const f of files) {
    f.topNames = new Set();
    f.extBound = new Set();
    f.extValues = new Set();
  }
  for (const f of files) collectNames(f, tables);
  for (const f of files) collectCallProtections(f, tables);
  for (const f of files) collectImportKeys(f, byRel);
  for (const f of files) collectOccurrences(f);
  const unrenamed = decideRenames(files, tables);
  const forbidden = new Set([...unrenamed, ...tables.protectAll, ...tables.protectAttr, ...tables.protectKw]);

  const groups = [];
  for (const g of rawGroups) {
    const ordered = topoOrder(g).filter((f) => f.chunks.length > 0);
    if (ordered.length === 0) continue;
    for (const f of ordered) f.lines = countLines(renderBodyPlain(f)) + f.imports.length + 2;
    const size = ordered.reduce((s, f) => s + f.lines, 0);
    groups.push({ files: ordered, size, key: ordered.map((f) => f.rel).join(','), all: g.map((f) => f.rel).sort() });
  }
  groups.sort((a, b) => (a.key < b.key ? -1 : 1));

  const rnd = makeRandom(`noisewise-corpus:${seed}:${lines}`);
  const namer = new Namer(rnd, forbidden);
  const out = new Map();
  const takenPaths = new Set();
  const provenance = new Map(); // generated file → the source files of its renamed copies, in order
  const instances = new Map(); // source file → how many renamed copies the corpus holds
  const countInstance = (file) => instances.set(file.rel, (instances.get(file.rel) ?? 0) + 1);
  const stats = { pyFiles: 0, notebooks: 0, pyLines: 0, notebookCodeLines: 0, packages: 0, crossFileImports: 0, moduleLines: [], notebookLines: [] };
  let total = 0;

  const freshName = (pool, n) => {
    for (let attempt = 0; ; attempt++) {
      const name = Array.from({ length: n }, () => rnd.pick(WORDS)).join('_') + (attempt > 10 ? String(attempt) : '');
      if (!pool.has(name) && !KEYWORDS.has(name) && !BUILTINS.has(name) && !forbidden.has(name)) {
        pool.add(name);
        return name;
      }
    }
  };
  const pickGroup = () => rnd.weighted(groups, (g) => g.size);

  while (total < lines) {
    // Notebooks are added whenever they fall below their share of the files written so far.
    if (stats.notebooks < Math.floor(NOTEBOOK_SHARE * (stats.pyFiles + stats.notebooks + 1))) {
      total += buildNotebook().codeLines;
      continue;
    }
    total += buildPackage();
  }

  function buildPackage() {
    const pkgName = freshName(takenPaths, 2);
    stats.packages++;
    const nModules = rnd.int(2, 8);
    const subName = rnd.chance(0.35) ? freshName(new Set([pkgName]), 1) : null;
    const moduleNames = new Set();
    const modules = [];
    let added = 0;
    const newModule = () => {
      const inSub = subName !== null && modules.length > 0 && rnd.chance(0.4);
      const m = new ModuleBuilder(pkgName, inSub ? [pkgName, subName] : [pkgName], freshName(moduleNames, rnd.int(1, 2)));
      m.target = rnd.logUniform(MIN_MODULE_LINES, MAX_MODULE_LINES);
      modules.push(m);
      return m;
    };
    let cur = newModule();
    for (;;) {
      const place = new Map(); // source file → module holding this instance's copy
      let group = pickGroup();
      for (let tries = 0; tries < 20 && !group.files.every((f) => cur.compatible(f)); tries++) group = pickGroup();
      const inst = new GroupInstance(group, namer);
      for (const file of group.files) {
        const hasDeps = file.imports.some((i) => i.local);
        if (cur.lines >= MIN_MODULE_LINES && (cur.lines + file.lines > MAX_MODULE_LINES || !cur.compatible(file) || (hasDeps && rnd.chance(0.35)))) {
          cur = newModule();
        } else if (!cur.compatible(file)) cur = newModule();
        cur.addExternalImports(file);
        // Local imports: import each renamed name from the module where its defining file instance was placed.
        const wanted = new Map(); // module → [[name, alias]]
        const aliases = [];
        for (const li of file.localImports) {
          const target = place.get(li.defFile.rel);
          if (!target || li.nested) continue;
          const orig = inst.rename(li.defKey, li.defName, true);
          const alias = inst.rename(li.boundKey, li.bound, true);
          if (target === cur) {
            if (alias !== orig) aliases.push(`${alias} = ${orig}`);
            continue;
          }
          if (!wanted.has(target)) wanted.set(target, []);
          wanted.get(target).push(alias === orig ? orig : `${orig} as ${alias}`);
        }
        for (const [target, names] of wanted) {
          // One import statement per source module, relative (mostly) or absolute, merged across the copies.
          let entry = cur.localImports.get(target);
          if (!entry) {
            entry = { from: rnd.chance(0.75) ? relativeImport(cur, target) : target.dotted, names: [] };
            cur.localImports.set(target, entry);
            cur.lines += 1;
            stats.crossFileImports++;
          }
          for (const n of names) if (!entry.names.includes(n)) entry.names.push(n);
        }
        inst.setNestedImports(file, (f) => place.get(f.rel), cur);
        let body = renderBody(inst, file);
        if (aliases.length) body = aliases.join('\n') + '\n\n' + body;
        cur.bodies.push(body);
        cur.lines += countLines(body) + 2;
        countInstance(file);
        cur.provenance.push(file.rel);
        for (const chunk of file.chunks) if (chunk.type === 'class_definition') cur.classes.push(inst.global(file, file.text.slice(childByField(chunk, 'name').start, childByField(chunk, 'name').end)));
        place.set(file.rel, cur);
      }
      const full = cur.lines >= cur.target;
      if (full && modules.length >= nModules) break;
      if (full) cur = newModule();
      if (total + modules.reduce((s, m) => s + m.lines, 0) >= lines && cur.lines >= MIN_MODULE_LINES) break;
    }
    let pkgLines = 0;
    const initFor = new Map();
    for (const m of modules) {
      if (m.bodies.length === 0) continue;
      const rel = path.join(...m.dirParts, m.name + '.py');
      const text = m.render();
      out.set(rel, text);
      provenance.set(rel, m.provenance);
      const n = countLines(text);
      stats.pyFiles++;
      stats.pyLines += n;
      stats.moduleLines.push(n);
      pkgLines += n;
      const dirKey = m.dirParts.join('/');
      if (!initFor.has(dirKey)) initFor.set(dirKey, []);
      if (m.classes.length) initFor.get(dirKey).push(m);
    }
    // Package __init__ files re-export a few classes, as real packages do.
    const dirs = new Set(modules.map((m) => m.dirParts.join('/')));
    for (const dirKey of [...dirs].sort()) {
      const parts = dirKey.split('/');
      const lines = [];
      for (const m of (initFor.get(dirKey) ?? []).slice(0, 3)) lines.push(`from .${m.name} import ${m.classes.slice(0, 2).join(', ')}`);
      const text = lines.length ? lines.join('\n') + '\n' : '';
      out.set(path.join(...parts, '__init__.py'), text);
      stats.pyFiles++;
      stats.pyLines += countLines(text);
      pkgLines += countLines(text);
    }
    return pkgLines;
  }

  function buildNotebook() {
    const name = freshName(takenPaths, rnd.int(2, 3));
    const target = rnd.logUniform(MIN_MODULE_LINES, 600);
    const imports = new ModuleBuilder('notebooks', ['notebooks'], name);
    const sourcesUsed = [];
    const cellsCode = [];
    let codeLines = 0;
    while (codeLines < target) {
      let group = pickGroup();
      for (let tries = 0; tries < 20 && !group.files.every((f) => imports.compatible(f)); tries++) group = pickGroup();
      if (!group.files.every((f) => imports.compatible(f))) break;
      const inst = new GroupInstance(group, namer);
      for (const file of group.files) {
        imports.addExternalImports(file);
        countInstance(file);
        sourcesUsed.push(file.rel);
        for (const li of file.localImports) {
          if (li.nested) continue;
          const orig = inst.rename(li.defKey, li.defName, true);
          const alias = inst.rename(li.boundKey, li.bound, true);
          if (alias !== orig) cellsCode.push(`${alias} = ${orig}`);
        }
        inst.setNestedImports(file, () => null, null);
        // Consecutive chunks share a cell, one to four at a time.
        let i = 0;
        while (i < file.chunks.length) {
          const k = rnd.int(1, 4);
          const text = renderBody(inst, file, file.chunks.slice(i, i + k));
          cellsCode.push(text);
          codeLines += countLines(text);
          i += k;
        }
      }
      if (cellsCode.length === 0) break;
    }
    const importText = [...imports.externalImports.filter((i) => i.future), ...imports.externalImports.filter((i) => !i.future)].map((i) => i.text).join('\n');
    const cells = [];
    let cellId = 0;
    const id = () => createHash('sha1').update(`${name}:${cellId++}`).digest('hex').slice(0, 8);
    const sourceLines = (text) => {
      const ls = text.replace(/\n+$/, '').split('\n');
      return ls.map((l, i) => (i < ls.length - 1 ? l + '\n' : l));
    };
    const words = () => Array.from({ length: rnd.int(3, 7) }, () => rnd.pick(WORDS)).join(' ');
    cells.push({ cell_type: 'markdown', id: id(), metadata: {}, source: sourceLines(`# ${capitalise(words())}\n\nInvented data for a benchmark notebook.`) });
    let nbCode = 0;
    const codeCell = (text) => {
      cells.push({ cell_type: 'code', execution_count: null, id: id(), metadata: {}, outputs: [], source: sourceLines(text) });
      nbCode += countLines(text.replace(/\n+$/, '') + '\n');
    };
    if (rnd.chance(0.3)) codeCell('!pip install --quiet torch');
    codeCell((rnd.chance(0.5) ? '%matplotlib inline\n' : '') + importText);
    for (const text of cellsCode) {
      if (rnd.chance(0.25)) cells.push({ cell_type: 'markdown', id: id(), metadata: {}, source: sourceLines(`## ${capitalise(words())}`) });
      codeCell(text);
    }
    const nb = {
      cells,
      metadata: { kernelspec: { display_name: 'Python 3', language: 'python', name: 'python3' }, language_info: { name: 'python' } },
      nbformat: 4,
      nbformat_minor: 5,
    };
    out.set(path.join('notebooks', name + '.ipynb'), JSON.stringify(nb, null, 1) + '\n');
    provenance.set(path.join('notebooks', name + '.ipynb'), sourcesUsed);
    stats.notebooks++;
    stats.notebookCodeLines += nbCode;
    stats.notebookLines.push(nbCode);
    return { codeLines: nbCode };
  }

  const digest = createHash('sha256');
  for (const key of [...out.keys()].sort()) digest.update(key).update('\0').update(out.get(key)).update('\0');
  const sorted = [...stats.moduleLines].sort((a, b) => a - b);
  const manifest = {
    generatorVersion: GENERATOR_VERSION,
    seed,
    requestedLines: lines,
    lines: stats.pyLines + stats.notebookCodeLines,
    pyFiles: stats.pyFiles,
    notebooks: stats.notebooks,
    files: stats.pyFiles + stats.notebooks,
    pyLines: stats.pyLines,
    notebookCodeLines: stats.notebookCodeLines,
    packages: stats.packages,
    crossFileImports: stats.crossFileImports,
    moduleLines: { min: sorted[0] ?? 0, median: sorted[Math.floor(sorted.length / 2)] ?? 0, max: sorted[sorted.length - 1] ?? 0 },
    sources: { used: files.length, skipped, groups: groups.length, groupFiles: groups.map((g) => g.all.map((r) => r.split(path.sep).join('/'))), digest: sourcesDigest(rels) },
    instances: Object.fromEntries([...instances.entries()].sort(([a], [b]) => (a < b ? -1 : 1))),
    provenance: Object.fromEntries([...provenance.entries()].map(([k, v]) => [k.split(path.sep).join('/'), v]).sort(([a], [b]) => (a < b ? -1 : 1))),
    contentDigest: digest.digest('hex'),
  };
  return { files: out, manifest };
}

function renderBodyPlain(file) {
  return file.chunks.map((c) => file.text.slice(c.start, c.end)).join('\n\n');
}

/** A digest of the generator and every source file, so a cached corpus is rebuilt when either changes. */
export function sourcesDigest(rels = listSources()) {
  const h = createHash('sha256');
  h.update(String(GENERATOR_VERSION));
  h.update(analyserNames().join(','));
  h.update(fs.readFileSync(fileURLToPath(import.meta.url)));
  for (const rel of rels) h.update(rel).update('\0').update(fs.readFileSync(path.join(root, rel))).update('\0');
  return h.digest('hex');
}

/** Writes a generated corpus to `dir` (replacing what is there) with its manifest. */
export function writeCorpus(dir, { files, manifest }) {
  fs.rmSync(dir, { recursive: true, force: true });
  fs.mkdirSync(dir, { recursive: true });
  for (const [rel, text] of files) {
    fs.mkdirSync(path.join(dir, path.dirname(rel)), { recursive: true });
    fs.writeFileSync(path.join(dir, rel), text);
  }
  // The corpus is a project of its own: a pyproject.toml so no configuration above it applies, and an empty `.git`
  // folder so that the .gitignore of this repository (which ignores .bench/) does not hide its files from the walk.
  fs.writeFileSync(path.join(dir, 'pyproject.toml'), `[project]\nname = "bench-corpus"\nversion = "0.0.0"\n`);
  fs.mkdirSync(path.join(dir, '.git'), { recursive: true });
  fs.writeFileSync(path.join(dir, 'corpus.json'), JSON.stringify(manifest, null, 2) + '\n');
}

/** Reads the manifest of a corpus folder, or null. */
export function readManifest(dir) {
  try {
    return JSON.parse(fs.readFileSync(path.join(dir, 'corpus.json'), 'utf8'));
  } catch {
    return null;
  }
}

/** Returns the folder of a cached corpus for (lines, seed), generating it when missing or stale. */
export async function ensureCorpus({ lines, seed, dir, log = () => {} }) {
  const digest = sourcesDigest();
  const existing = readManifest(dir);
  if (existing && existing.sources?.digest === digest && existing.requestedLines === lines && existing.seed === seed) return existing;
  log(`generating a ${lines.toLocaleString('en')}-line corpus in ${path.relative(process.cwd(), dir) || dir} …`);
  const corpus = await generateCorpus({ lines, seed });
  writeCorpus(dir, corpus);
  return corpus.manifest;
}

/** Checks a written corpus with CPython's ast, nbformat and the size bounds; returns a list of problems. */
export function verifyCorpus(dir) {
  const python = pickPython();
  if (!python) return ['python3 is not installed; cannot check the corpus with CPython ast'];
  const script = String.raw`
import ast, json, os, re, sys
root = sys.argv[1]
bad = []
n_py = n_nb = 0
sizes = []
for d, dirs, files in os.walk(root):
    dirs[:] = sorted(x for x in dirs if not x.startswith('.'))
    for f in sorted(files):
        p = os.path.join(d, f)
        if f.endswith('.py'):
            n_py += 1
            src = open(p, encoding='utf-8').read()
            if f != '__init__.py':
                sizes.append(src.count('\n'))
            try:
                ast.parse(src, p)
            except SyntaxError as e:
                bad.append(f'{p}:{e.lineno}: {e.msg}')
        elif f.endswith('.ipynb'):
            n_nb += 1
            nb = json.load(open(p, encoding='utf-8'))
            if nb.get('nbformat') != 4:
                bad.append(f'{p}: nbformat is {nb.get("nbformat")}')
            code = []
            for c in nb['cells']:
                if c['cell_type'] == 'code':
                    src = ''.join(c['source'])
                    code.append('\n'.join(l for l in src.split('\n') if not re.match(r'\s*[%!]', l)))
            try:
                ast.parse('\n'.join(code), p)
            except SyntaxError as e:
                bad.append(f'{p}:{e.lineno}: {e.msg}')
print(json.dumps({'py': n_py, 'notebooks': n_nb, 'bad': bad, 'sizes': sizes}))
`;
  const run = spawnSync(python, ['-c', script, dir], { encoding: 'utf8', maxBuffer: 256 * 1024 * 1024 });
  if (run.status !== 0) return [`python3 failed: ${run.stderr}`];
  const result = JSON.parse(run.stdout);
  const problems = [...result.bad];
  const manifest = readManifest(dir);
  const sizes = result.sizes.sort((a, b) => a - b);
  // The last module of a corpus may be cut short when the requested line count is reached.
  const small = sizes.filter((s) => s < MIN_MODULE_LINES);
  if (small.length > 1) problems.push(`${small.length} modules have fewer than ${MIN_MODULE_LINES} lines (${small.slice(0, 5).join(', ')} …)`);
  const large = sizes.filter((s) => s > MAX_MODULE_LINES);
  if (large.length) problems.push(`${large.length} modules have more than ${MAX_MODULE_LINES} lines (${large.slice(0, 5).join(', ')} …)`);
  if (manifest && (result.py !== manifest.pyFiles || result.notebooks !== manifest.notebooks)) problems.push(`the manifest says ${manifest.pyFiles} .py and ${manifest.notebooks} notebooks; found ${result.py} and ${result.notebooks}`);
  return { problems, python, py: result.py, notebooks: result.notebooks, minLines: sizes[0], maxLines: sizes[sizes.length - 1] };
}

/**
 * Runs the built CLI on the sources and on the corpus and compares, per generated file, its findings per rule with the
 * sum of the findings of the source files it was made from. Differences are reported, not failed: a rule that reads
 * names or configuration can legitimately differ. Returns null when the bundle is not built.
 */
export function meaningCheck(dir, manifest) {
  const cli = path.join(root, 'server', 'bin', 'noisewise.js');
  if (!fs.existsSync(path.join(root, 'server', 'dist', 'noisewise.js'))) return null;
  const run = (cwd, args, counts = new Map()) => {
    const r = spawnSync(process.execPath, [cli, 'check', ...args, '--format', 'json'], { cwd, encoding: 'utf8', maxBuffer: 1024 * 1024 * 1024 });
    if (r.status !== 0 && r.status !== 1 && r.status !== 2) throw new Error(`noisewise check failed (exit ${r.status}): ${r.stderr.slice(-500)}`);
    for (const f of JSON.parse(r.stdout).findings) {
      const key = path.relative(root, path.resolve(cwd, f.path)).split(path.sep).join('/');
      if (!counts.has(key)) counts.set(key, {});
      const c = counts.get(key);
      c[f.rule] = (c[f.rule] ?? 0) + 1;
    }
    return counts;
  };
  // Each source group is checked as a workspace of its own (rooted above its top package, as the rule harness
  // does), so that look-alike copies elsewhere in the repository (fix cases and their fixed versions) do not meet.
  const sources = new Map();
  for (const group of manifest.sources.groupFiles) {
    let base = path.dirname(group[0]);
    for (const rel of group) while (!(rel + '/').startsWith(base + '/') && base !== '.') base = path.dirname(base);
    while (base !== '.' && fs.existsSync(path.join(root, base, '__init__.py'))) base = path.dirname(base);
    run(path.join(root, base), group.map((rel) => path.relative(base, rel)), sources);
  }
  const corpus = run(dir, ['.'], new Map());
  const corpusRel = path.relative(root, dir).split(path.sep).join('/');
  const differences = [];
  let same = 0;
  const totals = { expected: {}, found: {} };
  for (const [rel, srcs] of Object.entries(manifest.provenance)) {
    const expected = {};
    for (const src of srcs) for (const [rule, n] of Object.entries(sources.get(src.split(path.sep).join('/')) ?? {})) expected[rule] = (expected[rule] ?? 0) + n;
    const found = corpus.get(`${corpusRel}/${rel}`) ?? {};
    for (const [k, v] of Object.entries(expected)) totals.expected[k] = (totals.expected[k] ?? 0) + v;
    for (const [k, v] of Object.entries(found)) totals.found[k] = (totals.found[k] ?? 0) + v;
    const rules = new Set([...Object.keys(expected), ...Object.keys(found)]);
    if ([...rules].every((r) => (expected[r] ?? 0) === (found[r] ?? 0))) same++;
    else differences.push({ file: rel, expected, found });
  }
  return { files: Object.keys(manifest.provenance).length, same, differences, totals };
}

function pickPython() {
  for (const candidate of ['python3', '/usr/bin/python3']) {
    const r = spawnSync(candidate, ['-c', 'import ast'], { encoding: 'utf8' });
    if (r.status === 0) return candidate;
  }
  return null;
}

// ---------------------------------------------------------------------------------------------------------------
// Command line.

function parseArgs(argv) {
  const opts = { lines: null, seed: '1', out: null, verify: false, quiet: false };
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i];
    const value = () => {
      if (i + 1 >= argv.length) throw new Error(`${a} needs a value`);
      return argv[++i];
    };
    if (a === '--lines') opts.lines = parseLines(value());
    else if (a === '--seed') opts.seed = value();
    else if (a === '--out') opts.out = value();
    else if (a === '--verify') opts.verify = true;
    else if (a === '--quiet') opts.quiet = true;
    else if (a === '-h' || a === '--help') opts.help = true;
    else throw new Error(`unknown argument ${a}`);
  }
  return opts;
}

/** Accepts 100000, 100_000, 100k or 1M. */
export function parseLines(text) {
  const m = /^(\d[\d_]*)([kKmM]?)$/.exec(text);
  if (!m) throw new Error(`--lines wants a number such as 100000, 100k or 1M (got ${text})`);
  const n = Number(m[1].replace(/_/g, ''));
  return m[2] === '' ? n : m[2].toLowerCase() === 'k' ? n * 1000 : n * 1_000_000;
}

async function main() {
  let opts;
  try {
    opts = parseArgs(process.argv.slice(2));
  } catch (error) {
    process.stderr.write(`gen-corpus: ${error.message}\n`);
    process.exit(2);
  }
  if (opts.help || !opts.out || (!opts.lines && !opts.verify)) {
    process.stdout.write('Usage: node scripts/gen-corpus.mjs --lines N [--seed S] --out DIR [--verify] [--quiet]\n');
    process.exit(opts.help ? 0 : 2);
  }
  const dir = path.resolve(opts.out);
  const log = (s) => opts.quiet || process.stderr.write(s + '\n');
  let manifest = readManifest(dir);
  if (opts.lines) {
    const started = performance.now();
    const corpus = await generateCorpus({ lines: opts.lines, seed: opts.seed });
    writeCorpus(dir, corpus);
    manifest = corpus.manifest;
    log(
      `wrote ${manifest.files} files (${manifest.pyFiles} .py in ${manifest.packages} packages, ${manifest.notebooks} notebooks), ` +
        `${manifest.lines.toLocaleString('en')} lines, ${manifest.crossFileImports} cross-file imports, module sizes ` +
        `${manifest.moduleLines.min}–${manifest.moduleLines.max} (median ${manifest.moduleLines.median}) in ${Math.round(performance.now() - started)} ms`,
    );
  }
  if (opts.verify) {
    if (!manifest) {
      process.stderr.write(`gen-corpus: ${dir} has no corpus.json; generate it first with --lines\n`);
      process.exit(2);
    }
    const result = verifyCorpus(dir);
    const problems = Array.isArray(result) ? result : [...result.problems];
    const again = await generateCorpus({ lines: manifest.requestedLines, seed: manifest.seed });
    if (again.manifest.sources.digest !== manifest.sources.digest) problems.push('the sources (or this generator) changed since the corpus was written: generate it again');
    else if (again.manifest.contentDigest !== manifest.contentDigest) problems.push('a second generation with the same seed and sources gave different output (the generator is not deterministic)');
    if (problems.length) {
      process.stderr.write(`gen-corpus --verify: ${problems.length} problem(s):\n${problems.map((p) => `  ${p}`).join('\n')}\n`);
      process.exit(1);
    }
    log(`verify: ${result.py} .py files and ${result.notebooks} notebooks parse with CPython ast (${result.python}); module sizes ${result.minLines}–${result.maxLines} lines; regeneration is byte-identical`);
    const meaning = meaningCheck(dir, manifest);
    if (meaning === null) log('meaning: skipped (the CLI bundle is not built; npm run build)');
    else {
      const fmt = (o) => Object.entries(o).sort().map(([k, v]) => `${k} ${v}`).join(', ') || 'none';
      log(`meaning: ${meaning.same} of ${meaning.files} generated files have exactly the findings of the sources they were made from`);
      log(`  findings expected from the sources: ${fmt(meaning.totals.expected)}; found: ${fmt(meaning.totals.found)}`);
      for (const d of meaning.differences.slice(0, 10)) log(`  differs: ${d.file}: expected ${fmt(d.expected)}, found ${fmt(d.found)}`);
    }
    for (const s of manifest.sources.skipped) log(`  source not used: ${s.rel} (${s.reason})`);
  }
}

if (process.argv[1] && path.resolve(process.argv[1]) === fileURLToPath(import.meta.url)) {
  await main();
}
