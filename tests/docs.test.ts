// Generated rule pages in docs/rules/ must equal what the rules' metadata and doc.md produce
// (`npm run gen-docs` rewrites them), so the pages on disk, `noisewise explain` and hovers never drift apart.
import * as fs from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { allRules } from '../rules/index';
import { renderRuleIndex, renderRulePage } from '../server/src/engine/docs';

const docsDir = path.resolve(__dirname, '..', 'docs', 'rules');
const update = process.env.NOISEWISE_UPDATE_DOCS === '1';

function checkOrWrite(file: string, text: string): void {
  if (update) {
    fs.mkdirSync(path.dirname(file), { recursive: true });
    fs.writeFileSync(file, text);
  }
  expect(fs.existsSync(file), `${path.relative(process.cwd(), file)} exists (run npm run gen-docs)`).toBe(true);
  expect(fs.readFileSync(file, 'utf8'), `${path.relative(process.cwd(), file)} is current (run npm run gen-docs)`).toBe(text);
}

describe('generated rule pages', () => {
  for (const rule of allRules) {
    it(`docs/rules/${rule.meta.id}.md is current`, () => {
      checkOrWrite(path.join(docsDir, `${rule.meta.id}.md`), renderRulePage(rule));
    });
  }
  it('docs/rules/index.md is current', () => {
    checkOrWrite(path.join(docsDir, 'index.md'), renderRuleIndex(allRules));
  });
  it('has no stale pages for removed rules', () => {
    const ids = new Set(allRules.map((r) => `${r.meta.id}.md`));
    const stale = fs.readdirSync(docsDir).filter((f) => f.endsWith('.md') && f !== 'index.md' && !ids.has(f));
    if (update) for (const f of stale) fs.rmSync(path.join(docsDir, f));
    else expect(stale).toEqual([]);
  });
  it('every rule page header states the metadata', () => {
    for (const rule of allRules) {
      const page = renderRulePage(rule);
      expect(page).toContain(`| Status | ${rule.meta.status.stage} since ${rule.meta.status.since} |`);
      expect(page.split('\n')[0]).toBe(`# ${rule.meta.id}: ${rule.meta.title}`);
    }
  });
});
