/**
 * `ratchet run --dry-run`: what the next step would be, with every script of it rendered into a plan
 * folder (<campaign>/.ratchet/plan/<time>/rounds/...), executing nothing and writing nothing to the
 * ledger. The ledger is only read (no lock). Planning runs as it would (it reads upstream outputs and
 * hashes inputs) but its events stay in memory.
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import type { Backend } from '../backends/backend.js';
import { TASK_FILE, writeTaskFilesSync } from '../backends/task-files.js';
import { readLedger, LedgerError } from '../ledger/journal.js';
import { shellQuote } from '../backends/shell.js';
import type { Outcome } from './advance.js';
import { pad } from './advance.js';
import { Engine, MemorySink } from './context.js';
import { taskDirOf } from './execute.js';
import { comparePoints, describeUntil, stageId, untilPoint, type Until } from './ids.js';
import { PLAN_DIR, abs } from './layout.js';
import type { Output } from './output.js';
import { materialize, taskSpec, writeTasks, type TaskJson } from './plan.js';
import { describeOutcome, type RunResult } from './run.js';
import type { SamplePolicy } from './sample-policy.js';
import { projectRound, type RoundProjection } from './round-plan.js';
import { STAGE_DEFS } from './stages/index.js';
import { foldEvents, frontier, stageRecord, summarizeStage } from './state.js';
import type { CampaignView } from './view.js';

export interface DryRunOptions {
  view: CampaignView;
  backend: Backend;
  out: Output;
  error: (m: string) => void;
  until?: Until;
  samplePolicy: SamplePolicy;
  campaignArg: string;
}

const SHOWN = 20;

export async function dryRun(o: DryRunOptions): Promise<RunResult> {
  let events;
  try {
    ({ events } = await readLedger(o.view.dir));
  } catch (err) {
    if (err instanceof LedgerError) {
      o.error(err.message);
      return { exitCode: 2 };
    }
    throw err;
  }
  const state = foldEvents(events);
  // Starting structures outside the campaign directory stay where they are (a run copies them into inputs/).
  const view = o.view;
  const engine = new Engine(view, new MemorySink(state.lastSeq), state, o.backend, o.out, o.samplePolicy, true);
  const out = o.out;
  const stamp = new Date().toISOString().replace(/[:.]/g, '-');
  const planRoot = abs(view.dir, `${PLAN_DIR}/${stamp}`);
  const planRel = `${PLAN_DIR}/${stamp}`;
  out.line(`dry run: nothing is executed and nothing is written to the ledger`);

  if (state.ended && !(state.ended.state === 'exhausted' && view.maxRounds > state.ended.round + 1)) {
    out.line(`the campaign has ended (${state.ended.state} in round ${state.ended.round}); nothing would run`);
    return { exitCode: 0 };
  }
  const p = frontier(state);
  if (p.stage === 'sample' && p.round > 0 && !state.judged.has(p.round - 1)) {
    out.line(`next step: judge round ${p.round - 1} (converged, out of rounds, or on to round ${p.round}); no task runs`);
    return { exitCode: 0 };
  }
  if (p.round >= view.maxRounds) {
    out.line(`the round limit (${view.maxRounds}) is reached; a run would record the campaign as exhausted`);
    return { exitCode: 0 };
  }
  if (o.until && comparePoints(p, untilPoint(o.until, p)) >= 0) {
    out.line(`the campaign stands at ${stageId(p.round, p.stage)}: ${o.until.after ? '--stop-after' : '--stop-before'} ${describeUntil(o.until)} stops before anything runs`);
    return { exitCode: 0 };
  }
  const sid = stageId(p.round, p.stage);
  const st = stageRecord(state, p.round, p.stage);
  const sum = st ? summarizeStage(st, { attempts: view.stages[p.stage].attempts }) : undefined;
  if (!sum || sum.phase === 'ready' || sum.phase === 'running') {
    // The rest of the round, planned in the plan folder (the built-in sample runs there for real).
    const target = o.until ? untilPoint(o.until, p) : undefined;
    const proj = await projectRound({
      view,
      backend: o.backend,
      samplePolicy: o.samplePolicy,
      ...(target && target.round === p.round ? { stopAt: target } : {}),
    });
    if (proj.nothing) {
      out.line(proj.nothing);
      return { exitCode: 0 };
    }
    showProjection(out, proj, view, o.backend);
    return { exitCode: 0 };
  }
  switch (sum.phase) {
    case 'collect':
      out.line(`next step: register the outputs of ${sid} as artifacts and judge them with its gate (no task runs)`);
      return { exitCode: 0 };
    case 'failed':
    case 'blocked': {
      const outcome: Outcome =
        sum.phase === 'failed'
          ? { kind: 'blocked', round: p.round, stage: p.stage, why: 'tasks', tasks: sum.failed.map((t) => t.id), reasons: sum.failed.map((t) => `${t.id}: ${t.attempts[t.attempts.length - 1].ended?.reason ?? 'failed'}`) }
          : { kind: 'blocked', round: p.round, stage: p.stage, why: 'gate', tasks: [], reasons: st?.gate?.reasons ?? [] };
      for (const l of describeOutcome(outcome, o.campaignArg)) out.line(l);
      out.line(`nothing would run until then (ratchet retry ${shellQuote(o.campaignArg)} ${sid})`);
      return { exitCode: 1 };
    }
    default:
      out.line(`${sid}: nothing to do`);
      return { exitCode: 0 };
  }
}

/** What a round's plan prints: per stage the tasks and the files written for them, and the round's core-hours at most. */
export function showProjection(out: Output, proj: RoundProjection, view: CampaignView, backend: Backend): void {
  for (const st of proj.stages) {
    const sid = stageId(st.round, st.stage);
    const n = st.tasks.length;
    const what = st.how === 'ran' ? 'ran the built-in sample in the plan folder' : st.how === 'to start' ? `would start ${n} task${n === 1 ? '' : 's'} planned by an earlier run` : `would plan and run ${n} task${n === 1 ? '' : 's'}`;
    out.line(`${pad(sid)} ${what}${st.command && st.how !== 'ran' ? `: ${st.command}` : ''}`);
    for (const note of st.notes) out.line(`  ${note}`);
    if (st.how !== 'ran' && n > 0) listTasks(out, st.tasks, view, st.stage, backend);
  }
  if (proj.stoppedBecause) out.line(`not planned further: ${proj.stoppedBecause}`);
  out.line(`the round's tasks may use at most ${proj.coreHoursAtMost.toFixed(1)} core-hours (walltime x cpus of each task; the budget is checked at submission)`);
  out.line(`every file named above was written under ${proj.planRel}/ (the campaign's own folders are untouched)`);
}

function listTasks(out: Output, tasks: { id: string; script?: string }[], view: CampaignView, stage: CampaignView['stages'] extends Record<infer K, unknown> ? K : never, backend: Backend): void {
  const r = view.stages[stage].resources;
  out.line(`  backend ${backend.name}; each task: ${r.cpus} cpu(s), ${r.gpus} gpu(s)${r.memory_mb ? `, ${r.memory_mb} MiB` : ''}, walltime ${r.walltime_s} s`);
  for (const t of tasks.slice(0, SHOWN)) out.line(`  ${pad(t.id, 20)} ${t.script ?? '(built in)'}`);
  if (tasks.length > SHOWN) out.line(`  ... and ${tasks.length - SHOWN} more`);
}

function readJsonSync<T>(p: string): T | undefined {
  try {
    return JSON.parse(readFileSync(p, 'utf8')) as T;
  } catch {
    return undefined;
  }
}
