// Preloaded into noisewise by the sandbox tests (`node --require`): every way of starting a process, loading native
// code or opening a network connection records the attempt in the file NOISEWISE_HOOK_LOG names and throws; worker
// threads are allowed only when they run noisewise's own bundle.
'use strict';
const fs = require('node:fs');

const logFile = process.env.NOISEWISE_HOOK_LOG;

/** Appends one attempt to the log (with a stack, to find the caller). */
function record(what) {
  if (logFile) fs.appendFileSync(logFile, `${JSON.stringify({ what, pid: process.pid, stack: new Error().stack })}\n`);
}

function forbid(moduleName, names) {
  const mod = require(moduleName);
  for (const name of names) {
    if (typeof mod[name] !== 'function') continue;
    mod[name] = function forbidden(...args) {
      record(`${moduleName}.${name}(${String(args[0]).slice(0, 200)})`);
      throw new Error(`noisewise sandbox: ${moduleName}.${name} is not allowed`);
    };
  }
}

forbid('node:child_process', ['spawn', 'spawnSync', 'exec', 'execSync', 'execFile', 'execFileSync', 'fork']);
forbid('node:net', ['connect', 'createConnection']);
forbid('node:tls', ['connect']);
forbid('node:http', ['request', 'get']);
forbid('node:https', ['request', 'get']);
forbid('node:dgram', ['createSocket']);
forbid('node:dns', ['lookup', 'resolve', 'resolve4', 'resolve6']);
forbid('node:vm', ['runInNewContext', 'runInThisContext', 'runInContext', 'compileFunction']);
if (typeof globalThis.fetch === 'function') {
  globalThis.fetch = function forbiddenFetch(input) {
    record(`fetch(${String(input).slice(0, 200)})`);
    return Promise.reject(new Error('noisewise sandbox: fetch is not allowed'));
  };
}
const originalDlopen = process.dlopen;
process.dlopen = function forbiddenDlopen(module, filename, ...rest) {
  record(`process.dlopen(${filename})`);
  return originalDlopen.call(this, module, filename, ...rest);
};

const workerThreads = require('node:worker_threads');
const OriginalWorker = workerThreads.Worker;
workerThreads.Worker = class CheckedWorker extends OriginalWorker {
  constructor(filename, options) {
    const name = String(filename);
    if (!/[\\/]server[\\/](dist|bin)[\\/]noisewise\.js$/.test(name) || (options && options.eval)) {
      record(`worker_threads.Worker(${name.slice(0, 200)})`);
      throw new Error('noisewise sandbox: a worker that does not run noisewise itself is not allowed');
    }
    super(filename, options);
  }
};
