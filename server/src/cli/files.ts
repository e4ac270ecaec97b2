// Finds the files `noisewise check` reads (walking folders, honouring .gitignore files and configured excludes) and
// reads them safely: binary, huge, unreadable and wrongly encoded files become notes instead of crashes.
import { createHash } from 'node:crypto';
import * as fs from 'node:fs';
import * as path from 'node:path';
import ignore, { type Ignore } from 'ignore';
import { isExcluded, loadConfigForDir } from '../engine/config';
import { UsageError } from './io';

/** Something the CLI has to say about a file it did not (fully) analyse; printed by every format. */
export interface CliNote {
  /** Path relative to the working directory, with forward slashes. */
  path: string;
  level: 'error' | 'warning' | 'info';
  /** `skipped` when the file was not analysed; otherwise what the note is about (`encoding`, `syntax`, `fix` …). */
  kind: string;
  message: string;
}

/** A file read for checking. */
export interface SourceFile {
  /** Path relative to the working directory, with forward slashes (what the output shows). */
  path: string;
  absPath: string;
  kind: 'python' | 'notebook';
  /** Decoded text without the byte-order mark. */
  text: string;
  /** Whether the file began with a UTF-8 byte-order mark (written back by --fix). */
  bom: boolean;
  /** The encoding used to decode: `utf-8`, or the name in the file's coding declaration. */
  encoding: string;
  /** Whether --fix may write the file back (false when it was decoded lossily or its encoding cannot be written). */
  writable: boolean;
  /** Why --fix may not write the file back, when it may not. */
  readOnlyReason?: string;
  /** The line break the file uses first (kept by --fix). */
  lineEnding: '\n' | '\r\n' | '\r';
  /** Permission bits, kept by --fix. */
  mode: number;
  /** SHA-256 of the bytes as read, to detect a file that changed before --fix writes it. */
  digest: string;
}

/** Files and notes found for a list of command-line paths. */
export interface CollectedFiles {
  files: SourceFile[];
  notes: CliNote[];
}

/** Files larger than this are skipped. */
export const MAX_FILE_BYTES = 10 * 1024 * 1024;
/** How many leading bytes are searched for a NUL byte to recognise a binary file. */
const BINARY_PROBE_BYTES = 8 * 1024;
/** Folders never searched (unless named on the command line). */
export const ALWAYS_SKIPPED_DIRS: ReadonlySet<string> = new Set(['.git', 'node_modules', '__pycache__', '.venv', 'venv', '.ipynb_checkpoints']);

/** The kind of file a path names, from its extension; null for anything that is not checked. */
export function sourceKind(filePath: string): 'python' | 'notebook' | null {
  const ext = path.extname(filePath).toLowerCase();
  if (ext === '.py') return 'python';
  if (ext === '.ipynb') return 'notebook';
  return null;
}

/** A path relative to `cwd` with forward slashes (the form every output uses). */
export function displayPath(cwd: string, absPath: string): string {
  const rel = path.relative(cwd, absPath);
  return (rel === '' ? path.basename(absPath) : rel).split(path.sep).join('/');
}

/** Options of collectFiles. */
export interface CollectOptions {
  cwd: string;
  /** Rule ids, for validating the configuration files met on the way. */
  knownRuleIds: readonly string[];
}

/**
 * Expands command-line paths into the files to check, sorted by path. Named files are checked when they are .py or
 * .ipynb; folders are walked, skipping ignored, excluded and always-skipped folders. Throws UsageError for a path
 * that does not exist and ConfigError for a broken pyproject.toml.
 */
export function collectFiles(args: readonly string[], options: CollectOptions): CollectedFiles {
  const notes: CliNote[] = [];
  const candidates = new Map<string, string>(); // real path → absolute path as found
  const walker = new Walker(options, notes, candidates);
  for (const arg of args.length > 0 ? args : ['.']) {
    const abs = path.resolve(options.cwd, arg);
    let stat: fs.Stats;
    try {
      stat = fs.statSync(abs);
    } catch (error) {
      const code = (error as NodeJS.ErrnoException).code;
      if (code === 'ENOENT' || code === 'ENOTDIR') throw new UsageError(`no such file or folder: ${arg}`, 'check');
      if (code === 'ELOOP') {
        notes.push({ path: displayPath(options.cwd, abs), level: 'warning', kind: 'skipped', message: 'symbolic link loop' });
        continue;
      }
      throw new UsageError(`cannot access ${arg} (${code ?? (error as Error).message})`, 'check');
    }
    if (stat.isDirectory()) {
      walker.walkRoot(abs);
    } else if (sourceKind(abs) === null) {
      notes.push({ path: displayPath(options.cwd, abs), level: 'info', kind: 'skipped', message: 'not a Python file (.py) or notebook (.ipynb)' });
    } else {
      walker.addCandidate(abs);
    }
  }
  const files: SourceFile[] = [];
  for (const abs of candidates.values()) {
    const result = readSourceFile(abs, displayPath(options.cwd, abs));
    if ('message' in result) notes.push(result);
    else {
      files.push(result.file);
      notes.push(...result.notes);
    }
  }
  files.sort((a, b) => compareStrings(a.path, b.path));
  notes.sort((a, b) => compareStrings(a.path, b.path));
  return { files, notes };
}

/** Plain code-unit order, the same on every machine and locale. */
export function compareStrings(a: string, b: string): number {
  return a < b ? -1 : a > b ? 1 : 0;
}

/** One .gitignore file's rules and the folder they are relative to. */
interface IgnoreLayer {
  base: string;
  rules: Ignore;
}

/**
 * Walks folders, remembering the real paths of folders already searched so that symbolic-link loops end. Symbolic
 * links are followed only while they stay inside the folders named to it: a checked project cannot make the walk
 * (and so `--fix`) reach files elsewhere on the machine.
 */
class Walker {
  private readonly searched = new Set<string>();
  /** Real paths of the folders named on the command line (the walk stays inside them). */
  private readonly roots: string[] = [];

  constructor(
    private readonly options: CollectOptions,
    private readonly notes: CliNote[],
    private readonly candidates: Map<string, string>,
  ) {}

  /** Adds a file to check (once per real path). */
  addCandidate(abs: string): void {
    let real = abs;
    try {
      real = fs.realpathSync(abs);
    } catch {
      // An unreadable link target is reported when the file is read.
    }
    if (!this.candidates.has(real)) this.candidates.set(real, abs);
  }

  /** Walks a folder named on the command line, with the .gitignore files of its repository above it. */
  walkRoot(abs: string): void {
    try {
      this.roots.push(fs.realpathSync(abs));
    } catch {
      this.roots.push(abs);
    }
    this.walk(abs, ancestorIgnoreLayers(abs, path.resolve(this.options.cwd)), false);
  }

  /** Whether a real path lies inside one of the named folders. */
  private insideRoots(real: string): boolean {
    return this.roots.some((root) => {
      const rel = path.relative(root, real);
      return rel === '' || (!rel.startsWith(`..${path.sep}`) && rel !== '..' && !path.isAbsolute(rel));
    });
  }

  private note(abs: string, level: CliNote['level'], message: string): void {
    this.notes.push({ path: displayPath(this.options.cwd, abs), level, kind: 'skipped', message });
  }

  /** Walks one folder; `viaLink` says it was reached through a symbolic link (so meeting it again is worth a note). */
  private walk(dir: string, layers: IgnoreLayer[], viaLink: boolean): void {
    let real: string;
    try {
      real = fs.realpathSync(dir);
    } catch (error) {
      this.note(dir, 'warning', `cannot resolve the folder (${(error as NodeJS.ErrnoException).code ?? 'error'})`);
      return;
    }
    if (this.searched.has(real)) {
      // A folder named twice on the command line is searched once, silently; a link back into the tree is explained.
      if (viaLink) this.note(dir, 'info', `symbolic link to a folder that is already searched (${displayPath(this.options.cwd, real)})`);
      return;
    }
    this.searched.add(real);
    let entries: fs.Dirent[];
    try {
      entries = fs.readdirSync(dir, { withFileTypes: true });
    } catch (error) {
      this.note(dir, 'warning', `cannot read the folder (${describeErrno(error)})`);
      return;
    }
    const here = readIgnoreLayer(dir);
    const active = here ? [...layers, here] : layers;
    entries.sort((a, b) => compareStrings(a.name, b.name));
    for (const entry of entries) {
      const abs = path.join(dir, entry.name);
      let isDir = entry.isDirectory();
      let isFile = entry.isFile();
      const isLink = entry.isSymbolicLink();
      if (isLink) {
        let real: string;
        try {
          const target = fs.statSync(abs);
          isDir = target.isDirectory();
          isFile = target.isFile();
          real = fs.realpathSync(abs);
        } catch (error) {
          const code = (error as NodeJS.ErrnoException).code;
          if (code === 'ELOOP') this.note(abs, 'warning', 'symbolic link loop');
          else if (sourceKind(abs) !== null) this.note(abs, 'warning', 'broken symbolic link');
          continue;
        }
        if ((isDir || (isFile && sourceKind(abs) !== null)) && !this.insideRoots(real)) {
          this.note(abs, 'info', `symbolic link to ${real}, outside the checked folders; not followed`);
          continue;
        }
      }
      if (isDir) {
        if (ALWAYS_SKIPPED_DIRS.has(entry.name)) continue;
        if (isIgnored(active, abs, true)) continue;
        if (isExcluded(loadConfigForDir(dir, this.options.knownRuleIds), abs)) continue;
        this.walk(abs, active, isLink);
      } else if (!isFile) {
        // A FIFO, socket or device with a Python name: never opened (reading a FIFO would block), but explained.
        if (sourceKind(abs) !== null && !isIgnored(active, abs, false)) this.note(abs, 'warning', 'not a regular file');
      } else {
        if (sourceKind(abs) === null) continue;
        if (isIgnored(active, abs, false)) continue;
        if (isExcluded(loadConfigForDir(dir, this.options.knownRuleIds), abs)) continue;
        this.addCandidate(abs);
      }
    }
  }
}

function describeErrno(error: unknown): string {
  const code = (error as NodeJS.ErrnoException).code;
  if (code === 'EACCES' || code === 'EPERM') return 'permission denied';
  return code ?? (error as Error).message;
}

/** The rules of `dir/.gitignore`, or null when there is none (an unreadable one is ignored). */
function readIgnoreLayer(dir: string): IgnoreLayer | null {
  let text: string;
  try {
    text = fs.readFileSync(path.join(dir, '.gitignore'), 'utf8');
  } catch {
    return null;
  }
  return { base: dir, rules: ignore().add(text) };
}

/**
 * The ignore rules that apply inside `start` from above it: `.git/info/exclude` and every .gitignore from the
 * repository's top folder (the nearest one holding `.git`) down to the parent of `start`. Outside a repository, the
 * .gitignore files between the working directory and `start` count, so naming a subfolder changes nothing.
 */
function ancestorIgnoreLayers(start: string, cwd: string): IgnoreLayer[] {
  if (fs.existsSync(path.join(start, '.git'))) return infoExcludeLayer(start);
  const chain: string[] = [];
  let dir = path.dirname(start);
  let top: string | null = null;
  for (;;) {
    chain.push(dir);
    if (fs.existsSync(path.join(dir, '.git'))) {
      top = dir;
      break;
    }
    const parent = path.dirname(dir);
    if (parent === dir) break;
    dir = parent;
  }
  let layers: IgnoreLayer[];
  let folders: string[];
  if (top !== null) {
    layers = infoExcludeLayer(top);
    folders = chain;
  } else {
    layers = [];
    const rel = path.relative(cwd, start);
    const insideCwd = rel !== '' && rel !== '..' && !rel.startsWith(`..${path.sep}`) && !path.isAbsolute(rel);
    folders = insideCwd ? chain.slice(0, chain.indexOf(cwd) + 1) : [];
  }
  for (const d of folders.reverse()) {
    const layer = readIgnoreLayer(d);
    if (layer) layers.push(layer);
  }
  return layers;
}

/** The repository's own exclude file (`.git/info/exclude`) as a layer, when there is one. */
function infoExcludeLayer(top: string): IgnoreLayer[] {
  try {
    return [{ base: top, rules: ignore().add(fs.readFileSync(path.join(top, '.git', 'info', 'exclude'), 'utf8')) }];
  } catch {
    return [];
  }
}

/** Whether the .gitignore layers ignore a path; a deeper file's rules override a shallower one's, as in git. */
function isIgnored(layers: readonly IgnoreLayer[], abs: string, isDir: boolean): boolean {
  let ignored = false;
  for (const layer of layers) {
    const rel = path.relative(layer.base, abs);
    if (rel === '' || rel === '..' || rel.startsWith(`..${path.sep}`) || path.isAbsolute(rel)) continue;
    const result = layer.rules.test(rel.split(path.sep).join('/') + (isDir ? '/' : ''));
    if (result.ignored) ignored = true;
    else if (result.unignored) ignored = false;
  }
  return ignored;
}

/** A file read and decoded, with the notes its reading produced (e.g. about its encoding). */
export interface ReadSource {
  file: SourceFile;
  notes: CliNote[];
}

/** Reads and decodes one file; returns a `skipped` note instead when it cannot or should not be checked. */
export function readSourceFile(abs: string, display: string): ReadSource | CliNote {
  const skipped = (level: CliNote['level'], message: string): CliNote => ({ path: display, level, kind: 'skipped', message });
  const kind = sourceKind(abs) ?? 'python';
  let stat: fs.Stats;
  try {
    stat = fs.statSync(abs);
  } catch (error) {
    return skipped('warning', `cannot read the file (${describeErrno(error)})`);
  }
  if (!stat.isFile()) return skipped('warning', 'not a regular file');
  if (stat.size > MAX_FILE_BYTES) {
    return skipped('warning', `larger than 10 MB (${(stat.size / (1024 * 1024)).toFixed(1)} MB)`);
  }
  let bytes: Buffer;
  try {
    bytes = fs.readFileSync(abs);
  } catch (error) {
    return skipped('warning', `cannot read the file (${describeErrno(error)})`);
  }
  if (bytes.length > MAX_FILE_BYTES) return skipped('warning', 'larger than 10 MB');
  if (bytes.subarray(0, BINARY_PROBE_BYTES).includes(0)) return skipped('warning', 'binary file (it contains NUL bytes)');
  const decoded = decodeSource(bytes, kind);
  const notes: CliNote[] = decoded.note ? [{ path: display, level: 'warning', kind: 'encoding', message: decoded.note }] : [];
  return {
    file: {
      path: display,
      absPath: abs,
      kind,
      text: decoded.text,
      bom: decoded.bom,
      encoding: decoded.encoding,
      writable: decoded.writable,
      ...(decoded.writable ? {} : { readOnlyReason: decoded.note ? 'it could not be decoded without loss' : `noisewise cannot write the ${decoded.encoding} encoding` }),
      lineEnding: detectLineEnding(decoded.text),
      mode: stat.mode & 0o7777,
      digest: digestOf(bytes),
    },
    notes,
  };
}

/** SHA-256 of some bytes, hex. */
export function digestOf(bytes: Uint8Array): string {
  return createHash('sha256').update(bytes).digest('hex');
}

/** The first line break of a text; `\n` when it has none. */
export function detectLineEnding(text: string): '\n' | '\r\n' | '\r' {
  const match = /\r\n|\n|\r/.exec(text);
  return match ? (match[0] as '\n' | '\r\n' | '\r') : '\n';
}

/** Result of decoding a file's bytes. */
export interface DecodedSource {
  text: string;
  bom: boolean;
  encoding: string;
  writable: boolean;
  /** Set when the decoding needs explaining (invalid bytes replaced, unknown encoding …). */
  note?: string;
}

/** Python names of ISO-8859-1, which Node encodes and decodes itself as `latin1`. */
const LATIN_1_NAMES = new Set(['latin-1', 'latin1', 'iso-8859-1', 'iso8859-1', 'iso-latin-1', 'l1', 'latin', 'cp819', '8859']);
const UTF_8_NAMES = new Set(['utf-8', 'utf8', 'utf-8-sig', 'u8', 'utf']);

/**
 * Decodes a file: a UTF-8 byte-order mark is removed and remembered; a Python file's coding declaration (PEP 263,
 * first two lines) is honoured; otherwise UTF-8, with invalid bytes replaced and a note saying so.
 */
export function decodeSource(bytes: Uint8Array, kind: 'python' | 'notebook'): DecodedSource {
  if (bytes.length >= 3 && bytes[0] === 0xef && bytes[1] === 0xbb && bytes[2] === 0xbf) {
    return { ...decodeUtf8(bytes.subarray(3)), bom: true };
  }
  const cookie = kind === 'python' ? codingDeclaration(bytes) : null;
  if (cookie === null) return { ...decodeUtf8(bytes), bom: false };
  const name = cookie.toLowerCase().replace(/_/g, '-');
  if (UTF_8_NAMES.has(name)) return { ...decodeUtf8(bytes), bom: false };
  if (LATIN_1_NAMES.has(name)) {
    return { text: Buffer.from(bytes).toString('latin1'), bom: false, encoding: cookie, writable: true };
  }
  let decoder: InstanceType<typeof TextDecoder>;
  try {
    decoder = new TextDecoder(name, { fatal: true });
  } catch {
    const utf8 = decodeUtf8(bytes);
    return {
      ...utf8,
      bom: false,
      writable: false,
      note: `unknown encoding "${cookie}" in the coding declaration; read as UTF-8${utf8.note ? ' with invalid bytes replaced' : ''}; --fix leaves this file alone`,
    };
  }
  try {
    return { text: decoder.decode(bytes), bom: false, encoding: cookie, writable: false };
  } catch {
    return {
      text: new TextDecoder(name).decode(bytes),
      bom: false,
      encoding: cookie,
      writable: false,
      note: `not valid ${cookie} as declared; invalid bytes were replaced for the analysis and --fix leaves this file alone`,
    };
  }
}

function decodeUtf8(bytes: Uint8Array): DecodedSource {
  try {
    return { text: new TextDecoder('utf-8', { fatal: true, ignoreBOM: true }).decode(bytes), bom: false, encoding: 'utf-8', writable: true };
  } catch {
    return {
      text: new TextDecoder('utf-8', { ignoreBOM: true }).decode(bytes),
      bom: false,
      encoding: 'utf-8',
      writable: false,
      note: 'not valid UTF-8 and no coding declaration; invalid bytes were replaced for the analysis and --fix leaves this file alone',
    };
  }
}

const CODING_RE = /^[ \t\f]*#.*?coding[:=][ \t]*([-\w.]+)/;
const BLANK_OR_COMMENT_RE = /^[ \t\f]*(#.*)?$/;

/** The encoding named by a PEP 263 coding declaration in the first two lines, or null. */
export function codingDeclaration(bytes: Uint8Array): string | null {
  const head = Buffer.from(bytes.subarray(0, 1024)).toString('latin1');
  const lines = head.split(/\r\n|\r|\n/, 2);
  const first = CODING_RE.exec(lines[0] ?? '');
  if (first) return first[1]!;
  if (lines.length > 1 && BLANK_OR_COMMENT_RE.test(lines[0]!)) {
    const second = CODING_RE.exec(lines[1]!);
    if (second) return second[1]!;
  }
  return null;
}

/** Encodes text for writing back in the file's own encoding, with its byte-order mark; null when that is impossible. */
export function encodeSource(file: Pick<SourceFile, 'bom' | 'encoding' | 'writable'>, text: string): Buffer | null {
  if (!file.writable) return null;
  const name = file.encoding.toLowerCase().replace(/_/g, '-');
  if (LATIN_1_NAMES.has(name)) {
    for (let i = 0; i < text.length; i++) if (text.charCodeAt(i) > 0xff) return null;
    return Buffer.from(text, 'latin1');
  }
  const body = Buffer.from(text, 'utf8');
  return file.bom ? Buffer.concat([Buffer.from([0xef, 0xbb, 0xbf]), body]) : body;
}

/**
 * Writes a file atomically: a temporary file in the same folder is written, flushed to disk and renamed over the
 * target, keeping the permission bits and (where the process may) the owner. A symbolic link is followed: the file
 * it points to is replaced and the link stays a link.
 */
export function writeFileAtomic(abs: string, options: { bytes: Uint8Array; mode: number }): void {
  const { bytes, mode } = options;
  let target = abs;
  try {
    target = fs.realpathSync(abs);
  } catch {
    // A path that does not resolve is written as named (the rename below reports what is wrong with it).
  }
  let owner: { uid: number; gid: number } | null = null;
  try {
    const stat = fs.statSync(target);
    owner = { uid: stat.uid, gid: stat.gid };
  } catch {
    // A new file keeps the process's owner.
  }
  const dir = path.dirname(target);
  const temp = path.join(dir, `.${path.basename(target)}.noisewise-${process.pid}-${Date.now().toString(36)}.tmp`);
  let fd: number | null = null;
  try {
    fd = fs.openSync(temp, 'wx', mode);
    fs.writeSync(fd, bytes);
    fs.fchmodSync(fd, mode);
    if (owner && (owner.uid !== process.getuid?.() || owner.gid !== process.getgid?.())) {
      try {
        fs.fchownSync(fd, owner.uid, owner.gid);
      } catch {
        // Only a privileged process may give a file away; otherwise the rewritten file is the writer's.
      }
    }
    fs.fsyncSync(fd);
    fs.closeSync(fd);
    fd = null;
    fs.renameSync(temp, target);
  } catch (error) {
    if (fd !== null) fs.closeSync(fd);
    fs.rmSync(temp, { force: true });
    throw error;
  }
  try {
    const dirFd = fs.openSync(dir, 'r');
    try {
      fs.fsyncSync(dirFd);
    } finally {
      fs.closeSync(dirFd);
    }
  } catch {
    // Some filesystems refuse to sync a folder; the rename itself has happened.
  }
}
