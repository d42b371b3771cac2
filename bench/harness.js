// Small timing harness for the benchmarks: best of several runs, so a busy machine inflates less.
import { performance } from 'node:perf_hooks';

/** Runs fn() `runs` times after one warm-up and returns the best wall time in milliseconds. */
export function bestOf(runs, fn) {
  fn();
  let best = Number.POSITIVE_INFINITY;
  for (let i = 0; i < runs; i++) {
    const t0 = performance.now();
    fn();
    best = Math.min(best, performance.now() - t0);
  }
  return best;
}

export function nsPer(ms, count) {
  return (ms * 1e6) / count;
}

export function line(label, value, unit, extra = '') {
  console.log(`${label.padEnd(58)} ${String(value).padStart(12)} ${unit.padEnd(12)} ${extra}`);
}

export function header(title) {
  console.log(`\n== ${title} (node ${process.version}, ${new Date().toISOString().slice(0, 10)}) ==`);
}

export function verdict(ok) {
  return ok ? 'goal met' : 'GOAL MISSED';
}
