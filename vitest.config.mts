// Test runner configuration: every suite under tests/ runs against the real components.
import * as fs from 'node:fs';
import { defineConfig } from 'vitest/config';

export default defineConfig({
  plugins: [
    {
      // The same web-tree-sitter patch as the bundle (scripts/bundle.mjs), so tests exercise the code path users run.
      name: 'tree-sitter-internals',
      enforce: 'pre',
      load(id) {
        if (!/web-tree-sitter[\\/]web-tree-sitter\.js$/.test(id)) return null;
        const source = fs.readFileSync(id, 'utf8');
        if (!/^var C;$/m.test(source) || !/^var TRANSFER_BUFFER;$/m.test(source)) throw new Error('web-tree-sitter changed: update the internals patch');
        return `${source}\nexport function __noisewiseInternals() { return { C, TRANSFER_BUFFER }; }\n`;
      },
    },
  ],
  server: { deps: { inline: [/web-tree-sitter/] } },
  test: {
    include: ['tests/**/*.test.ts'],
    testTimeout: 60_000,
    hookTimeout: 120_000,
    pool: 'forks',
    server: { deps: { inline: [/web-tree-sitter/] } },
  },
});
