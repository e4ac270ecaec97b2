// Where the rule pages that diagnostics and hovers link to live on this machine, so the links open offline: the
// pages shipped beside the bundle (the .vsix puts them in dist/rules/), or else pages the server writes into a cache
// folder from the text bundled into it.
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import type { RegisteredRule } from '../../../rules/index';
import { renderRulePage } from '../engine/docs';
import { pathToUri } from './uris';

/** Rule pages as files, with a `file:` link per rule. */
export class RulePages {
  private folder: string | null = null;
  private readonly pages = new Map<string, string>();

  constructor(
    private readonly rules: readonly RegisteredRule[],
    /** The published page of a rule, used only when no page could be written locally. */
    private readonly onlineHref: (ruleId: string) => string,
  ) {
    for (const rule of rules) this.pages.set(rule.meta.id, renderRulePage(rule));
  }

  /**
   * Chooses the folder: the first candidate that holds every page exactly as this build renders it, else `cacheDir`
   * after writing the pages there. Returns a sentence for the log.
   */
  locate(candidates: readonly (string | undefined)[], cacheDir: string): string {
    for (const candidate of candidates) {
      if (!candidate) continue;
      if (this.holdsCurrentPages(candidate)) {
        this.folder = candidate;
        return `rule pages: ${candidate}`;
      }
    }
    try {
      fs.mkdirSync(cacheDir, { recursive: true });
      for (const [id, text] of this.pages) {
        const file = path.join(cacheDir, `${id}.md`);
        if (readOrNull(file) !== text) fs.writeFileSync(file, text);
      }
      this.folder = cacheDir;
      return `rule pages written to ${cacheDir}`;
    } catch (error) {
      this.folder = null;
      return `rule pages could not be written to ${cacheDir} (${(error as Error).message}); diagnostics link to the published pages`;
    }
  }

  /** The link for a rule's page: a `file:` URI when the pages are local. */
  href(ruleId: string): string {
    if (this.folder !== null && this.pages.has(ruleId)) return pathToUri(path.join(this.folder, `${ruleId}.md`));
    return this.onlineHref(ruleId);
  }

  /** The rendered page of a rule (the same text as the file). */
  page(ruleId: string): string | undefined {
    return this.pages.get(ruleId);
  }

  /** The rules the pages describe. */
  get ruleIds(): string[] {
    return this.rules.map((r) => r.meta.id);
  }

  private holdsCurrentPages(folder: string): boolean {
    for (const [id, text] of this.pages) if (readOrNull(path.join(folder, `${id}.md`)) !== text) return false;
    return true;
  }
}

function readOrNull(file: string): string | null {
  try {
    return fs.readFileSync(file, 'utf8');
  } catch {
    return null;
  }
}

/** The per-user cache folder for this version's pages (`$XDG_CACHE_HOME/noisewise/<version>/rules`). */
export function defaultRulePagesCache(version: string): string {
  const base = process.env.XDG_CACHE_HOME && path.isAbsolute(process.env.XDG_CACHE_HOME) ? process.env.XDG_CACHE_HOME : path.join(os.homedir(), '.cache');
  return path.join(base, 'noisewise', version, 'rules');
}
