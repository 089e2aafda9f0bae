/**
 * Core-hour budget: pure arithmetic, no I/O.
 *
 * - Estimate: what a stage can consume at most = sum over its tasks of cpus x walltime (hours); for a
 *   uniform stage, tasks x cpus x walltime. It is an upper bound of the allocation asked for, not a
 *   prediction: most tasks end before their walltime.
 * - Actual: per attempt, (end - start) of its exit record x cpus; an attempt killed at its walltime
 *   without an exit record counts its whole walltime (the allocation was held that long); other attempts
 *   without a record count 0 (unknown) and are listed as such.
 * - Check: spent (actual, all attempts so far) + committed (estimates of attempts still queued or
 *   running) + the new estimate, against budget.core_hours (campaign) and budget.core_hours_per_round.
 */
import type { ExitRecord } from './backend.js';

export interface Budget {
  /** budget.core_hours: cap for the whole campaign. */
  core_hours?: number;
  /** budget.core_hours_per_round: cap for one round. */
  core_hours_per_round?: number;
}

/** Core-hours of `tasks` tasks of `cpus` cores for `walltimeS` seconds each. */
export function estimateCoreHours(tasks: number, cpus: number, walltimeS: number): number {
  if (![tasks, cpus, walltimeS].every((v) => Number.isFinite(v) && v >= 0)) throw new Error(`estimateCoreHours: expected numbers >= 0, found ${tasks}, ${cpus}, ${walltimeS}`);
  return (tasks * cpus * walltimeS) / 3600;
}

/** Sum of cpus x walltime over tasks whose resources may differ (e.g. after a walltime escalation). */
export function estimateTasksCoreHours(tasks: { resources: { cpus: number; walltime_s: number } }[]): number {
  let h = 0;
  for (const t of tasks) h += estimateCoreHours(1, t.resources.cpus, t.resources.walltime_s);
  return h;
}

export interface BudgetCheckInput {
  /** What is about to be submitted, e.g. "r1/label". */
  label: string;
  /** Its estimate in core-hours. */
  estimate: number;
  /** Core-hours used so far by the whole campaign (actual, all attempts). */
  spentCampaign: number;
  /** Core-hours used so far by this round (actual). */
  spentRound: number;
  /** Estimates of attempts already submitted and not ended (campaign-wide; `committedRound` for this round). */
  committedCampaign?: number;
  committedRound?: number;
  budget: Budget;
  /** --allow-over-budget: report, but allow. */
  allowOver?: boolean;
}

export interface BudgetCheck {
  /** May the submission go ahead? */
  ok: boolean;
  /** Would it exceed a cap? (ok can still be true with allowOver.) */
  over: boolean;
  /** Plain words: why not, or what is left. */
  message: string;
}

const f1 = (h: number) => (Math.round(h * 10) / 10).toFixed(1);

/** Compare an estimate with what is left of the campaign's and the round's budget. */
export function checkBudget(i: BudgetCheckInput): BudgetCheck {
  const lines: string[] = [];
  let over = false;
  const caps: [string, number | undefined, number, number][] = [
    ['campaign', i.budget.core_hours, i.spentCampaign, i.committedCampaign ?? 0],
    ['round', i.budget.core_hours_per_round, i.spentRound, i.committedRound ?? 0],
  ];
  for (const [what, cap, spent, committed] of caps) {
    if (cap === undefined) continue;
    const left = cap - spent - committed;
    if (i.estimate > left + 1e-9) {
      over = true;
      lines.push(
        `${i.label} may use up to ${f1(i.estimate)} core-hours, but the ${what} budget has ${f1(Math.max(0, left))} of ${f1(cap)} left (${f1(spent)} used, ${f1(committed)} held by tasks still queued or running)`,
      );
    } else {
      lines.push(`${what} budget: ${f1(left - i.estimate)} of ${f1(cap)} core-hours left after ${i.label} (estimate ${f1(i.estimate)})`);
    }
  }
  if (lines.length === 0) return { ok: true, over: false, message: `no budget set; ${i.label} may use up to ${f1(i.estimate)} core-hours` };
  if (over) {
    const overLines = lines.filter((l) => l.includes('may use up to'));
    return i.allowOver
      ? { ok: true, over: true, message: `${overLines.join('; ')}; submitting anyway (--allow-over-budget)` }
      : { ok: false, over: true, message: `${overLines.join('; ')}. Raise budget.core_hours / budget.core_hours_per_round, lower the stage's walltime or cpus, or run with --allow-over-budget. (The estimate is tasks x cpus x walltime, an upper bound.)` };
  }
  return { ok: true, over: false, message: lines.join('; ') };
}

export interface AttemptUsage {
  /** Task id "r<round>/<stage>/<task>". */
  task: string;
  round: number;
  stage: string;
  cpus: number;
  /** The attempt's exit record, when it wrote one. */
  exit?: Pick<ExitRecord, 'start' | 'end'>;
  /** The attempt's final state (to count a walltime kill without a record). */
  state?: string;
  walltime_s?: number;
}

/** Core-hours of one attempt (see the module comment); `known` is false when it could not be measured. */
export function attemptCoreHours(a: AttemptUsage): { hours: number; known: boolean } {
  if (a.exit) {
    const s = Date.parse(a.exit.start);
    const e = Date.parse(a.exit.end);
    if (Number.isFinite(s) && Number.isFinite(e)) return { hours: (Math.max(0, e - s) / 3_600_000) * a.cpus, known: true };
  }
  if (a.state === 'walltime' && a.walltime_s !== undefined) return { hours: (a.walltime_s / 3600) * a.cpus, known: true };
  return { hours: 0, known: false };
}

export interface UsageSummary {
  total: number;
  byRound: Map<number, number>;
  /** Keyed "r<round>/<stage>". */
  byStage: Map<string, number>;
  byTask: Map<string, number>;
  /** Attempts whose use could not be measured (no exit record). */
  unknown: number;
}

/** Actual core-hours summed per task, stage and round, over all attempts given. */
export function summarizeUsage(attempts: AttemptUsage[]): UsageSummary {
  const out: UsageSummary = { total: 0, byRound: new Map(), byStage: new Map(), byTask: new Map(), unknown: 0 };
  const add = <K>(m: Map<K, number>, k: K, h: number) => m.set(k, (m.get(k) ?? 0) + h);
  for (const a of attempts) {
    const { hours, known } = attemptCoreHours(a);
    if (!known) out.unknown++;
    out.total += hours;
    add(out.byRound, a.round, hours);
    add(out.byStage, `r${a.round}/${a.stage}`, hours);
    add(out.byTask, a.task, hours);
  }
  return out;
}
