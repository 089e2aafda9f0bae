/**
 * Attempts and their cost: what resources an attempt asks for (the stage's, plus the escalations of
 * earlier attempts), what to do after an attempt that did not succeed (through the backends' decide():
 * resubmit, escalated or as it was, or block the stage), and the core-hours spent and held, checked
 * against the campaign's budget before anything is submitted. Decisions are ledger events, so a run
 * killed anywhere makes the same decision again.
 */
import { join } from 'node:path';
import type { Resources, TaskSpec } from '../backends/backend.js';
import { checkBudget, estimateTasksCoreHours, summarizeUsage, type AttemptUsage, type UsageSummary } from '../backends/budget.js';
import { decide, type AttemptHistory, type RetryPolicy } from '../backends/classify.js';
import { tailLines, STDERR_FILE } from '../backends/exit-record.js';
import { archiveAttempt } from '../backends/task-files.js';
import type { Engine } from './context.js';
import { stageId, type Stage } from './ids.js';
import { abs, taskDirRel } from './layout.js';
import { current, stageRecord, type CampaignState, type TaskRecord } from './state.js';
import { killPoint } from './testhook.js';
import type { CampaignView } from './view.js';

/** The campaign's rules for attempts of a stage (backend.* and the stage's attempts). */
export function retryPolicy(view: CampaignView, stage: Stage): RetryPolicy {
  const b = view.campaign.backend;
  return {
    attempts: view.stages[stage].attempts,
    walltimeFactor: b.walltime_factor,
    walltimeMaxS: b.walltime_max,
    memoryFactor: b.memory_factor,
    memoryMaxMb: b.memory_max,
  };
}

/** Counts of the task's attempts so far (the current one included); failures since the last manual retry. */
export function attemptHistory(t: TaskRecord): AttemptHistory {
  const h: AttemptHistory = { failures: 0, walltimes: 0, memoryKills: 0, requeues: 0 };
  let manualSeen = false;
  for (let k = t.attempts.length - 1; k >= 0; k--) {
    const a = t.attempts[k];
    const s = a.ended?.state;
    if (s === 'failed' && !manualSeen) h.failures++;
    else if (s === 'walltime') h.walltimes++;
    else if (s === 'out_of_memory') h.memoryKills++;
    else if (s === 'node_failure' || s === 'preempted' || s === 'lost' || s === 'cancelled') h.requeues++;
    if (a.manual) manualSeen = true;
  }
  return h;
}

/**
 * Resources of the task's attempt `n` (default: the current one): the stage's, with the walltime and
 * memory raised by earlier escalations (never lowered below what the campaign now asks).
 */
export function effectiveResources(view: CampaignView, t: TaskRecord, n = current(t).n): Resources {
  const r: Resources = { ...view.stages[t.stage].resources };
  for (const a of t.attempts) {
    if (a.n > n) break;
    const c = a.changed;
    if (c?.walltime_s !== undefined && c.walltime_s > r.walltime_s) r.walltime_s = c.walltime_s;
    if (c?.memory_mb !== undefined && (r.memory_mb === undefined || c.memory_mb > r.memory_mb)) r.memory_mb = c.memory_mb;
  }
  return r;
}

/** The resources an attempt was submitted with (recorded), else what it would get now. */
function attemptResources(view: CampaignView, t: TaskRecord, n: number): Pick<Resources, 'cpus' | 'walltime_s'> {
  return t.attempts[n - 1]?.resources ?? effectiveResources(view, t, n);
}

/**
 * For every task of the stage whose current attempt ended without success and has no decision yet:
 * decide() with its effective resources, its history and its log's last lines; resubmit (previous
 * records moved aside, then a 'task_retry' with the reason and the changed resources) or block
 * ('task_blocked' with the reason). Returns the number of decisions written.
 */
export async function decideEnded(engine: Engine, round: number, stage: Stage): Promise<number> {
  const st = stageRecord(engine.state, round, stage);
  if (!st) return 0;
  const policy = retryPolicy(engine.view, stage);
  let n = 0;
  for (const t of st.tasks) {
    const a = current(t);
    // A held task waits for a person (ratchet retry): no automatic resubmission.
    if (!a.ended || a.ended.state === 'succeeded' || a.blocked !== undefined || t.held) continue;
    const dir = abs(engine.view.dir, taskDirRel(t.round, t.stage, t.name));
    const tail = await tailLines(join(dir, STDERR_FILE), 20);
    const d = decide(a.ended.state, effectiveResources(engine.view, t), attemptHistory(t), policy, tail);
    if (d.action === 'resubmit') {
      const archived = await archiveAttempt(dir);
      killPoint('archived');
      await engine.append({
        type: 'task_retry',
        task: t.id,
        attempt: a.n + 1,
        reason: d.reason,
        failure: d.failure,
        resources: d.changed,
        ...(archived ? { archived: engine.rel(archived) } : {}),
      });
      n++;
      if (Object.keys(d.changed).length > 0 || d.failure !== 'failed') engine.out.line(`${t.id} ${d.reason}`);
    } else if (d.action === 'block') {
      await engine.append({ type: 'task_blocked', task: t.id, attempt: a.n, failure: d.failure, reason: d.reason });
      n++;
    }
  }
  return n;
}

// ---------------------------------------------------------------------------------------------
// Core-hours

/** Core-hours used by every attempt that ended (cpus from its submission, times from its exit record). */
export function usage(view: CampaignView, state: CampaignState): UsageSummary {
  const list: AttemptUsage[] = [];
  for (const t of state.tasks.values()) {
    for (const a of t.attempts) {
      if (!a.ended || a.job_id === undefined) continue;
      const r = attemptResources(view, t, a.n);
      const e = a.ended;
      list.push({
        task: t.id,
        round: t.round,
        stage: t.stage,
        cpus: r.cpus,
        ...(e.start && e.end ? { exit: { start: e.start, end: e.end } } : {}),
        state: e.state,
        walltime_s: r.walltime_s,
      });
    }
  }
  return summarizeUsage(list);
}

/** Estimates of attempts submitted and not ended: campaign-wide and for one round. */
export function committed(view: CampaignView, state: CampaignState, round: number): { campaign: number; round: number } {
  let all = 0;
  let mine = 0;
  for (const t of state.tasks.values()) {
    const a = current(t);
    if (a.job_id === undefined || a.ended) continue;
    const h = estimateTasksCoreHours([{ resources: attemptResources(view, t, a.n) }]);
    all += h;
    if (t.round === round) mine += h;
  }
  return { campaign: all, round: mine };
}

/** A submission the budget refuses (exit code 1; `budget_refused` is in the ledger). */
export class BudgetRefusedError extends Error {
  readonly exitCode = 1;
  constructor(message: string) {
    super(message);
    this.name = 'BudgetRefusedError';
  }
}

/**
 * Check the budget before the given specs of one stage are submitted. Over budget: records
 * `budget_refused` and throws BudgetRefusedError, unless allowed (then records `budget_overridden`).
 */
export async function guardBudget(engine: Engine, round: number, stage: Stage, specs: TaskSpec[]): Promise<void> {
  const budget = engine.view.campaign.budget;
  if (specs.length === 0 || (budget.core_hours === undefined && budget.core_hours_per_round === undefined)) return;
  const estimate = estimateTasksCoreHours(specs);
  const spent = usage(engine.view, engine.state);
  const held = committed(engine.view, engine.state, round);
  const label = stageId(round, stage);
  const c = checkBudget({
    label,
    estimate,
    spentCampaign: spent.total,
    spentRound: spent.byRound.get(round) ?? 0,
    committedCampaign: held.campaign,
    committedRound: held.round,
    budget,
    allowOver: engine.allowOverBudget,
  });
  const figures = { round, stage, estimate, spent_campaign: spent.total, spent_round: spent.byRound.get(round) ?? 0, committed: held.campaign, message: c.message };
  if (!c.ok) {
    await engine.append({ type: 'budget_refused', ...figures });
    throw new BudgetRefusedError(`${label} not submitted: ${c.message}`);
  }
  if (c.over) {
    await engine.append({ type: 'budget_overridden', ...figures });
    engine.out.line(`${label} over budget: ${c.message}`);
  }
}
