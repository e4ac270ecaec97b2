// Converts between the URIs editors send and the absolute paths the engine works with, including the made-up
// paths given to documents that have no file on disk (untitled buffers, other URI schemes).
import { createHash } from 'node:crypto';
import * as os from 'node:os';
import * as path from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';

/** The absolute path of a `file:` URI, or null for any other scheme (or a URI that cannot be read). */
export function fileUriToPath(uri: string): string | null {
  if (!uri.startsWith('file:')) return null;
  try {
    return path.resolve(fileURLToPath(uri));
  } catch {
    return null;
  }
}

/** The `file:` URI of an absolute path. */
export function pathToUri(absPath: string): string {
  return pathToFileURL(absPath).href;
}

/**
 * The path the engine uses for a document: its file path for `file:` URIs, otherwise a stable made-up path inside
 * `root` (so that imports of workspace modules still resolve) ending in the extension that fits its kind.
 */
export function documentPath(uri: string, kind: 'python' | 'notebook', root: string | null): string {
  const onDisk = fileUriToPath(uri);
  if (onDisk !== null) return onDisk;
  const digest = createHash('sha1').update(uri).digest('hex').slice(0, 12);
  const base = uri.replace(/^[a-z][a-z0-9+.-]*:/i, '').replace(/[^A-Za-z0-9_]+/g, '_').replace(/^_+|_+$/g, '').slice(-40) || 'document';
  const folder = path.join(root ?? path.join(os.tmpdir(), 'noisewise-documents'), '__noisewise_unsaved__');
  return path.join(folder, `${base}_${digest}${kind === 'notebook' ? '.ipynb' : '.py'}`);
}

/** Whether `child` is `parent` or lies inside it. */
export function isInside(parent: string, child: string): boolean {
  const rel = path.relative(parent, child);
  return rel === '' || (!rel.startsWith('..') && !path.isAbsolute(rel));
}
