// Runs the noisewise bundle (one CommonJS file) with V8's code cache: the compiled bytecode of the bundle is kept in
// `<bundle>.v8cache` beside it, so a later start skips compiling what an earlier run compiled (about 50 ms of a
// 350 ms single-file check, and of the language server's cold start). The cache is only an accelerator: it is used
// when its header names this exact bundle text (SHA-256), V8 checks its own version and flags, and any failure to read
// or write it falls back to a plain compile. It is written next to the bundle only, so whoever can change it can
// change the bundle too. NOISEWISE_CODE_CACHE=0 turns it off.
// This file is plain CommonJS (not bundled): bin/noisewise.js requires it, and scripts/bundle.mjs copies it into the
// extension as the server's entry (client/dist/server.js).
'use strict';
const crypto = require('node:crypto');
const fs = require('node:fs');
const Module = require('node:module');
const path = require('node:path');
const v8 = require('node:v8');
const vm = require('node:vm');

/**
 * V8 settings applied before the bundle is compiled: they must be set first because V8 rejects a code cache made
 * under other flags. They are process-wide, so the check's worker threads (which load the bundle themselves) run
 * under them too. The analysis code is large and polymorphic; with V8's defaults, optimising compiles took about 7 s
 * of background CPU per 100k-line check (docs/performance.md, "Compiler budgets").
 */
const V8_TUNING_FLAGS = [
  // Bytecode inlined into one optimised function in total (V8's default is 920).
  '--max-inlined-bytecode-size-cumulative=150',
  // Work a function does before it is considered for optimisation (V8's default is 132 KB in Node 20).
  '--interrupt-budget=300000',
];

/** Header: 32 bytes of SHA-256 of the bundle text, then the run time (ms, uint32 LE) of the run that wrote it. */
const HEADER_BYTES = 36;
/** A cache written by a run shorter than this (e.g. `--version`) is replaced by one from a longer run. */
const SHORT_RUN_MS = 500;
/** A long-running process (the language server) writes its cache this long after it started. */
const SERVER_SAVE_DELAY_MS = 5000;

function runBundle(bundlePath) {
  const started = Date.now();
  if (process.env.NOISEWISE_V8_DEFAULTS !== '1') for (const flag of V8_TUNING_FLAGS) v8.setFlagsFromString(flag);
  const source = fs.readFileSync(bundlePath, 'utf8');
  const wrapped = Module.wrap(source);
  const useCache = process.env.NOISEWISE_CODE_CACHE !== '0';
  const cachePath = `${bundlePath}.v8cache`;
  const digest = crypto.createHash('sha256').update(source).digest();
  let cached = null;
  let cachedRunMs = 0;
  if (useCache) {
    try {
      const bytes = fs.readFileSync(cachePath);
      if (bytes.length > HEADER_BYTES && bytes.subarray(0, 32).equals(digest)) {
        cachedRunMs = bytes.readUInt32LE(32);
        cached = bytes.subarray(HEADER_BYTES);
      }
    } catch {
      // No cache yet, or unreadable: compile from source.
    }
  }
  const script = new vm.Script(wrapped, { filename: bundlePath, cachedData: cached ?? undefined });
  const accepted = cached !== null && !script.cachedDataRejected;

  let saved = false;
  const save = () => {
    if (saved || !useCache) return;
    saved = true;
    const runMs = Date.now() - started;
    // Keep an accepted cache unless it came from a short run and this run did clearly more.
    if (accepted && !(cachedRunMs < SHORT_RUN_MS && runMs >= 2 * Math.max(cachedRunMs, 1))) return;
    const temp = `${cachePath}.${process.pid}.tmp`;
    try {
      const data = script.createCachedData();
      const header = Buffer.alloc(HEADER_BYTES);
      digest.copy(header, 0);
      header.writeUInt32LE(Math.min(runMs, 0xffffffff), 32);
      fs.writeFileSync(temp, Buffer.concat([header, data]));
      fs.renameSync(temp, cachePath);
    } catch {
      // A read-only install, a full disk, something else in the cache's place: run without a cache, leave nothing.
      fs.rmSync(temp, { force: true });
    }
  };
  process.once('exit', save);
  setTimeout(save, SERVER_SAVE_DELAY_MS).unref();

  const bundleModule = new Module(bundlePath, module);
  bundleModule.filename = bundlePath;
  bundleModule.paths = Module._nodeModulePaths(path.dirname(bundlePath));
  const bundleRequire = (id) => bundleModule.require(id);
  bundleRequire.resolve = (request, options) => Module._resolveFilename(request, bundleModule, false, options);
  bundleRequire.main = process.mainModule;
  bundleRequire.cache = Module._cache;
  bundleModule.loaded = true;
  script.runInThisContext().call(bundleModule.exports, bundleModule.exports, bundleRequire, bundleModule, bundlePath, path.dirname(bundlePath));
  return { cache: !useCache ? 'off' : accepted ? 'used' : cached !== null ? 'rejected' : 'none' };
}

module.exports = { runBundle, V8_TUNING_FLAGS };
