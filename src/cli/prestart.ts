/**
 * Early start of worker threads for `ratchet check contacts|committee|drift` on files big enough to be read in
 * parallel (see src/atoms/xyz/spare.ts). Only a hint read from the raw arguments: when it guesses wrong, a spare worker
 * goes unused (or mapFrames starts its own), the results are the same.
 */
import { statSync } from 'node:fs';
import { availableParallelism } from 'node:os';
import { PARALLEL_MIN_BYTES, startSpareWorkers } from '../atoms/xyz/spare.js';

/** Gate modules whose per-frame functions run in worker threads (relative to this file; the same in dist/). */
const PARALLEL_GATES: Record<string, string> = {
  contacts: '../gates/contacts.js',
  committee: '../gates/committee.js',
  drift: '../gates/drift.js',
};

export function prestart(args: string[]): void {
  if (args[0] !== 'check') return;
  const gate = PARALLEL_GATES[args[1] ?? ''];
  if (gate === undefined) return;
  // as many threads as the command will use: --workers n, else the gates' default min(2, cpus)
  let threads = Math.min(2, availableParallelism());
  for (let k = 2; k < args.length; k++) {
    const m = /^--workers(?:=(.*))?$/.exec(args[k]);
    if (m) threads = Number(m[1] ?? args[k + 1]);
  }
  if (!(Number.isInteger(threads) && threads > 1)) return;
  const big = args.slice(2).some((a) => {
    if (a.startsWith('-')) return false;
    try {
      return statSync(a).size >= PARALLEL_MIN_BYTES;
    } catch {
      return false;
    }
  });
  if (big) startSpareWorkers(threads - 1, [new URL(gate, import.meta.url).href]);
}
