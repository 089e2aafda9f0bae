/**
 * The round and stage state machine. Each turn looks at the folded state, finds the first stage that
 * has not passed (the frontier) and does the one thing it needs: plan it, start its tasks, wait for
 * them, collect and judge it, or stop (blocked, held, --stop-before/--stop-after, finished, interrupted). Every step writes its
 * files before its ledger event and can be repeated after a crash, so a run killed anywhere resumes.
 */
import { assessConvergence, type ConditionBands } from '../select/converge.js';
import type { Engine } from './context.js';
import { collectStage } from './collect.js';
import type { CampaignEndedEvent } from './events.js';
import { startTasks, waitForStage, stopOutstanding, showProgress } from './execute.js';
import { comparePoints, describeUntil, stageId, untilPoint, type Point, type Stage, type Until } from './ids.js';
import { materialize, writeTasks } from './plan.js';
import { STAGE_DEFS } from './stages/index.js';
import type { ConditionFigures } from './stages/simulate.js';
import type { StageVerdict } from './stages/types.js';
import { frontier, stageRecord, summarizeStage } from './state.js';
import { killPoint } from './testhook.js';
import { decideEnded } from './attempts.js';
import { applyStopRequests, campaignStopOf, describeHold, type StopRequest } from './stop.js';
import { isUnvalidated, waiveValidation } from './unvalidated.js';

export type Outcome =
  | { kind: 'finished'; state: 'converged' | 'exhausted'; round: number; reasons: string[]; holding: string[] }
  | { kind: 'stopped'; at: Point; until: string }
  | { kind: 'blocked'; round: number; stage: Stage; why: 'tasks' | 'gate' | 'held'; reasons: string[]; tasks: string[] }
  | { kind: 'waiting'; round: number; stage: Stage; outstanding: number }
  | { kind: 'interrupted'; signal: NodeJS.Signals; cancelled: string[] };

export interface AdvanceOptions {
  until?: Until;
  /** Wait for tasks on a backend without drain() (a cluster); local always waits. */
  follow?: boolean;
}

export async function advance(engine: Engine, opts: AdvanceOptions = {}): Promise<Outcome> {
  let target: Point | undefined;
  for (;;) {
    if (engine.interrupted) return interrupted(engine);
    // A person's stop (ratchet stop, from another terminal) is recorded before anything else is done.
    await applyStopRequests(engine);
    const whole = campaignStopOf(engine);
    if (whole) return heldOutcome(engine, whole);
    const s = engine.state;
    if (s.ended) {
      if (s.ended.state === 'exhausted' && engine.view.maxRounds > s.ended.round + 1) {
        await engine.append({ type: 'campaign_resumed', reason: `rounds.max is now ${engine.view.maxRounds}` });
        engine.out.line(`round limit raised to ${engine.view.maxRounds}: the campaign goes on`);
        continue;
      }
      return { kind: 'finished', state: s.ended.state, round: s.ended.round, reasons: s.ended.reasons, holding: s.ended.holding };
    }
    const p = frontier(s);
    // A finished round is judged (converged, exhausted or go on) before anything else happens.
    if (p.stage === 'sample' && p.round > 0 && !s.judged.has(p.round - 1)) {
      await judgeConvergence(engine, p.round - 1);
      continue;
    }
    if (p.round >= engine.view.maxRounds) {
      const ev: CampaignEndedEvent = {
        type: 'campaign_ended',
        state: 'exhausted',
        round: p.round - 1,
        reasons: [`the round limit (rounds.max = ${engine.view.maxRounds}) is reached`],
        holding: [],
      };
      await engine.append(ev);
      continue;
    }
    if (opts.until) {
      target ??= untilPoint(opts.until, p);
      if (comparePoints(p, target) >= 0) return { kind: 'stopped', at: p, until: `${opts.until.after ? '--stop-after' : '--stop-before'} ${describeUntil(opts.until)}` };
    }
    const st = stageRecord(s, p.round, p.stage);
    if (!st) {
      await planStage(engine, p.round, p.stage);
      continue;
    }
    await decideEnded(engine, p.round, p.stage);
    const sum = summarizeStage(st, { attempts: engine.view.stages[p.stage].attempts, restarted: engine.restartedHere });
    switch (sum.phase) {
      case 'ready':
      case 'running': {
        if (sum.toStart.length > 0) {
          await startTasks(engine, sum.toStart);
          showProgress(engine, p.round, p.stage, true);
        }
        const w = await waitForStage(engine, p.round, p.stage, opts.follow ?? false);
        if (engine.interrupted) return interrupted(engine);
        if (w.outstanding > 0) return { kind: 'waiting', round: p.round, stage: p.stage, outstanding: w.outstanding };
        continue;
      }
      case 'held':
        return {
          kind: 'blocked',
          round: p.round,
          stage: p.stage,
          why: 'held',
          reasons: sum.held.map(describeHold),
          tasks: sum.held.map((t) => t.id),
        };
      case 'failed':
        return {
          kind: 'blocked',
          round: p.round,
          stage: p.stage,
          why: 'tasks',
          reasons: sum.failed.map((t) => {
            const a = t.attempts[t.attempts.length - 1];
            const why = (a.ended?.state !== 'failed' ? a.blocked : undefined) ?? a.ended?.reason ?? a.ended?.state ?? 'failed';
            return `${t.id} (attempt ${a.n}) ${a.ended?.state ?? 'failed'}: ${why}`;
          }),
          tasks: sum.failed.map((t) => t.id),
        };
      case 'collect':
        await collectAndGate(engine, p.round, p.stage);
        continue;
      case 'blocked': {
        const reasons = [...(st.gate?.reasons ?? [])];
        if (p.stage === 'validate') {
          // A committee that fails validation may still explore when the campaign says so (never converging).
          const w = waiveValidation(engine.view.campaign, s, p.round);
          if ('event' in w) {
            await engine.append(w.event);
            engine.out.line(`${pad(stageId(p.round, p.stage))} not validated: round ${p.round} explores anyway with short runs (rounds.explore_unvalidated, ${w.event.in_a_row} in a row); it cannot converge`);
            continue;
          }
          if (engine.view.campaign.rounds.explore_unvalidated.max_rounds > 0) reasons.push(`not exploring without validation: ${w.refused}`);
        }
        return { kind: 'blocked', round: p.round, stage: p.stage, why: 'gate', reasons, tasks: [] };
      }
      case 'passed':
      case 'pending':
        throw new Error(`internal: the frontier ${stageId(p.round, p.stage)} is ${sum.phase}`);
    }
  }
}

/** The run ends after a campaign-wide stop: the frontier stage is blocked by its held tasks (or by the stop itself). */
function heldOutcome(engine: Engine, req: StopRequest): Outcome {
  const p = frontier(engine.state);
  const held = [...engine.state.tasks.values()].filter((t) => t.held && t.round === p.round && t.stage === p.stage);
  return {
    kind: 'blocked',
    round: p.round,
    stage: p.stage,
    why: 'held',
    reasons: held.length ? held.map(describeHold) : [`the campaign was stopped by ${req.by} at ${req.at}${req.reason ? `: ${req.reason}` : ''}; nothing was queued or running`],
    tasks: held.map((t) => t.id),
  };
}

async function interrupted(engine: Engine): Promise<Outcome> {
  const cancelled = await stopOutstanding(engine);
  return { kind: 'interrupted', signal: engine.interrupted ?? 'SIGINT', cancelled };
}

/** Plan a stage: register what it reads, write its task directories, then record it as planned. */
export async function planStage(engine: Engine, round: number, stage: Stage): Promise<void> {
  const ctx = engine.stageContext(round);
  const plan = await STAGE_DEFS[stage].plan(ctx);
  const tasks = materialize(engine.view, round, stage, plan, engine.backend);
  writeTasks(engine.view, tasks);
  killPoint('planned');
  await engine.registerMany(plan.artifacts);
  await engine.append({ type: 'stage_planned', round, stage, tasks: tasks.map((t) => t.name), inputs: plan.inputs });
  const builtin = tasks.some((t) => t.json.builtin);
  const notes = plan.notes?.length ? ` (${plan.notes.join('; ')})` : '';
  engine.out.line(`${pad(stageId(round, stage))} planned ${tasks.length} task${tasks.length === 1 ? '' : 's'}${builtin ? ' (built in)' : ''}${notes}`);
}

export function pad(s: string, n = 12): string {
  return s.length >= n ? s : s + ' '.repeat(n - s.length);
}

/** Collect a stage whose tasks all succeeded, judge it, record the verdict (and, after simulate, convergence). */
export async function collectAndGate(engine: Engine, round: number, stage: Stage): Promise<StageVerdict> {
  const missing = await collectStage(engine, round, stage);
  const verdict: StageVerdict =
    missing.length > 0
      ? { verdict: 'fail', reasons: missing, gates: [{ gate: 'outputs', verdict: 'fail', reasons: missing, figures: { missing: missing.length } }] }
      : await STAGE_DEFS[stage].gate(engine.stageContext(round));
  killPoint('gated');
  await engine.append({ type: 'stage_gated', round, stage, ...verdict });
  const first = verdict.reasons[0] ?? verdict.summary ?? verdict.gates.flatMap((g) => g.reasons).find((r) => r.length > 0);
  const more = verdict.reasons.length > 1 ? ` (+${verdict.reasons.length - 1} more)` : '';
  const summary = first ? `: ${first.split('\n')[0]}${more}` : '';
  engine.out.line(`${pad(stageId(round, stage))} ${engine.out.word(verdict.verdict)}${summary}`);
  return verdict;
}

/**
 * Judge a round whose simulate stage passed, from the verdicts in the ledger (so it can be done again
 * after a crash with the same answer): converged, exhausted, or go on. Writes one event.
 */
async function judgeConvergence(engine: Engine, round: number): Promise<void> {
  killPoint('judging');
  const sim = stageRecord(engine.state, round, 'simulate')?.gate;
  const figs = (sim?.figures?.conditions ?? {}) as Record<string, ConditionFigures>;
  const conditions: ConditionBands[] = engine.view.conditions.map((c) => {
    const f = figs[c.name];
    return {
      condition: c.name,
      frames: f?.frames ?? 0,
      confident: f?.confident ?? 0,
      informative: f?.informative ?? 0,
      runaway: f?.runaway ?? 0,
      truncatedAt: f?.truncated?.first_violation_frame ?? null,
    };
  });
  const val = stageRecord(engine.state, round, 'validate')?.gate;
  const errorsMeasured = val?.gates.some((g) => g.gate === 'errors' && typeof g.figures.frames === 'number' && g.figures.frames > 0) ?? false;
  const unvalidated = isUnvalidated(engine.state, round);
  const conv = assessConvergence({
    round,
    maxRounds: engine.view.maxRounds,
    target: engine.view.target,
    conditions,
    validationPassed: val !== undefined && val.verdict !== 'fail' && errorsMeasured && !unvalidated,
  });
  if (unvalidated) conv.reasons.push(`round ${round} was not validated (it explored under rounds.explore_unvalidated): it cannot converge`);
  const fractions = conditions.map((c) => `${c.condition} ${c.frames ? (c.confident / c.frames).toFixed(3) : '-'}`).join(', ');
  engine.out.line(`${pad(`r${round}`)} confident fraction: ${fractions} (target ${engine.view.target})`);
  if (conv.state !== 'continue') {
    await engine.append({ type: 'campaign_ended', state: conv.state, round, reasons: conv.reasons, holding: conv.holding });
  } else {
    await engine.append({ type: 'round_judged', round, state: 'continue', reasons: conv.reasons, holding: conv.holding });
  }
}
