// Loads web-tree-sitter and the Python grammar once, from wasm files that sit beside the bundle (or in node_modules during development).
import * as fs from 'node:fs';
import * as path from 'node:path';
import { Language, Parser } from 'web-tree-sitter';

let ready: Promise<Language> | undefined;
let language: Language | undefined;

/** Directories searched for the wasm files: the bundle's own folder first, then the installed packages. */
function wasmCandidates(file: string): string[] {
  const here = typeof __dirname === 'string' ? __dirname : process.cwd();
  const out = [path.join(here, file)];
  const roots = [here, process.cwd()];
  for (const root of roots) {
    let dir = root;
    for (let i = 0; i < 8; i++) {
      out.push(path.join(dir, 'node_modules', file === 'tree-sitter-python.wasm' ? 'tree-sitter-python' : 'web-tree-sitter', file));
      const parent = path.dirname(dir);
      if (parent === dir) break;
      dir = parent;
    }
  }
  return out;
}

/** Finds a wasm file beside the bundle or in node_modules; throws a clear error when it is missing. */
export function locateWasm(file: 'web-tree-sitter.wasm' | 'tree-sitter-python.wasm'): string {
  for (const candidate of wasmCandidates(file)) {
    if (fs.existsSync(candidate)) return candidate;
  }
  throw new Error(`noisewise: cannot find ${file} beside the bundle or in node_modules; reinstall or rebuild (npm run build).`);
}

/** Initialises the tree-sitter runtime and the Python grammar; safe to call many times. */
export function initParser(): Promise<Language> {
  if (!ready) {
    ready = (async () => {
      const runtimeWasm = locateWasm('web-tree-sitter.wasm');
      await Parser.init({ locateFile: () => runtimeWasm });
      // The grammar's bytes, not its path: given a path, web-tree-sitter reads it through a dynamic import, which a
      // bundle loaded from V8's code cache cannot run (see server/bin/run-bundle.js).
      language = await Language.load(new Uint8Array(fs.readFileSync(locateWasm('tree-sitter-python.wasm'))));
      return language;
    })();
  }
  return ready;
}

/** Creates a parser for Python; `initParser()` must have resolved first. */
export function createParser(): Parser {
  if (!language) throw new Error('noisewise: initParser() must complete before parsing');
  const parser = new Parser();
  parser.setLanguage(language);
  return parser;
}
