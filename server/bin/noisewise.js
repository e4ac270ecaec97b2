#!/usr/bin/env node
// Launcher for the noisewise command: runs the bundled CLI (through V8's code cache, see run-bundle.js), telling the
// user how to build it when it is missing.
'use strict';
const fs = require('node:fs');
const path = require('node:path');

const bundle = path.join(__dirname, '..', 'dist', 'noisewise.js');
if (!fs.existsSync(bundle)) {
  process.stderr.write('noisewise: the bundle is not built yet; run `npm run build` in the repository root.\n');
  process.exit(2);
}
require('./run-bundle.js').runBundle(bundle);
