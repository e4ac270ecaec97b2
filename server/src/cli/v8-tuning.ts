// V8 settings for this process, applied before any analysis code runs (the bundle's entry point imports this module
// first). The analysis code is large and polymorphic: with V8's default budgets, TurboFan spent about 7 s of
// background-thread CPU compiling (and, after deoptimisations, recompiling) heavily inlined functions during a
// check of the 100k-line benchmark corpus, more than the check itself spends on parsing. Every worker thread pays
// that again, on the same cores as the workers, which is what kept the parallel check from being faster than the
// single-threaded one on two cores. A smaller inlining budget and a later tier-up cut that cost; the figures are in
// docs/performance.md ("Compiler budgets"). NOISEWISE_V8_DEFAULTS=1 keeps V8's defaults (to measure the difference).
import * as v8 from 'node:v8';

/** The flags set, in the order given to V8. */
export const V8_TUNING_FLAGS: readonly string[] = [
  // Bytecode inlined into one optimised function in total (V8's default is 920).
  '--max-inlined-bytecode-size-cumulative=150',
  // Work a function does before it is considered for optimisation (V8's default is 132 KB in Node 20).
  '--interrupt-budget=300000',
];

/** Applies the flags unless NOISEWISE_V8_DEFAULTS=1; returns whether it did. */
export function applyV8Tuning(env: NodeJS.ProcessEnv = process.env): boolean {
  if (env.NOISEWISE_V8_DEFAULTS === '1') return false;
  for (const flag of V8_TUNING_FLAGS) v8.setFlagsFromString(flag);
  return true;
}

applyV8Tuning();
