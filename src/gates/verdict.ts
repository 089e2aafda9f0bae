import type { Verdict } from './types.js';

const RANK: Record<Verdict, number> = { pass: 0, warn: 1, fail: 2 };

/** The worse of the given verdicts (fail > warn > pass); pass for none. */
export function worst(...verdicts: Verdict[]): Verdict {
  let out: Verdict = 'pass';
  for (const v of verdicts) if (RANK[v] > RANK[out]) out = v;
  return out;
}

/** Collects reasons with their verdicts while a gate looks at its figures. */
export class Judgement {
  verdict: Verdict = 'pass';
  readonly reasons: string[] = [];

  fail(reason: string): void {
    this.add('fail', reason);
  }

  warn(reason: string): void {
    this.add('warn', reason);
  }

  /** A remark that does not change the verdict. */
  note(reason: string): void {
    this.reasons.push(reason);
  }

  add(verdict: Verdict, reason: string): void {
    this.verdict = worst(this.verdict, verdict);
    this.reasons.push(reason);
  }

  /**
   * Compare a figure against warn/fail limits (either may be undefined or Infinity to disable).
   * `describe` gets the limit that was crossed and returns the reason.
   */
  limit(value: number, warnAt: number | undefined, failAt: number | undefined, describe: (kind: 'warn' | 'fail', limit: number) => string): void {
    if (failAt !== undefined && Number.isFinite(failAt) && value > failAt) this.fail(describe('fail', failAt));
    else if (warnAt !== undefined && Number.isFinite(warnAt) && value > warnAt) this.warn(describe('warn', warnAt));
  }
}

/** A number for a reason line: `digits` significant digits, trailing zeros dropped (0.001, 1.5e-7, 2500). */
export function fmt(x: number, digits = 4): string {
  if (!Number.isFinite(x)) return String(x);
  return String(Number(x.toPrecision(digits)));
}
