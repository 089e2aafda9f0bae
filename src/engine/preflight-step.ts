/**
 * `ratchet run --preflight`: the next step's task specs built as a dry run builds them (planned in
 * memory when the stage is not planned yet, else from the task.json of the tasks to start), checked by
 * the backend's preflight (render, `bash -n`, the scheduler's own validation where it has one), the
 * problems printed per stage and recorded as one 'preflight' event. Nothing is submitted.
 */
import type { TaskSpec } from '../backends/backend.js';
import { preflight, problemsByStage, type PreflightReport } from '../backends/preflight.js';
import { effectiveResources } from './attempts.js';
import { Engine, MemorySink } from './context.js';
import { readTaskJson, taskDirOf } from './execute.js';
import { stageId, type Stage } from './ids.js';
import { abs, taskDirRel } from './layout.js';
import { taskJson, taskSpec } from './plan.js';
import { STAGE_DEFS } from './stages/index.js';
import { projectRound, type RoundProjection } from './round-plan.js';
import { LedgerError } from '../ledger/journal.js';
import { frontier, stageRecord, summarizeStage } from './state.js';

export interface NextStep {
  round: number;
  stage: Stage;
  specs: TaskSpec[];
}

/** The tasks the next step would submit, or a sentence saying why no task would be submitted. */
export async function nextStepSpecs(engine: Engine): Promise<NextStep | string> {
  const { view, state } = engine;
  if (state.ended && !(state.ended.state === 'exhausted' && view.maxRounds > state.ended.round + 1)) return `the campaign has ended (${state.ended.state}); nothing would be submitted`;
  const p = frontier(state);
  if (p.stage === 'sample' && p.round > 0 && !state.judged.has(p.round - 1)) return `the next step judges round ${p.round - 1}; no task is submitted`;
  if (p.round >= view.maxRounds) return `the round limit (${view.maxRounds}) is reached; nothing would be submitted`;
  const st = stageRecord(state, p.round, p.stage);
  const specs: TaskSpec[] = [];
  if (!st) {
    // Planned in memory only: registrations and events are not written (a dry engine).
    const dry = new Engine(view, new MemorySink(state.lastSeq), state, engine.backend, engine.out, engine.samplePolicy, true);
    const plan = await STAGE_DEFS[p.stage].plan(dry.stageContext(p.round));
    for (const t of plan.tasks) {
      if (t.builtin) continue;
      specs.push(taskSpec(view, taskJson(view, p.round, p.stage, t), abs(view.dir, taskDirRel(p.round, p.stage, t.name))));
    }
  } else {
    const sum = summarizeStage(st, { attempts: view.stages[p.stage].attempts, restarted: engine.restartedHere });
    for (const t of sum.toStart) {
      const json = await readTaskJson(engine, t);
      if (json.builtin) continue;
      const spec = taskSpec(view, json, taskDirOf(engine, t));
      spec.resources = effectiveResources(view, t);
      specs.push(spec);
    }
  }
  return { round: p.round, stage: p.stage, specs };
}

/**
 * The preflight of a whole round, from wherever the campaign stands: every task of the round planned as a
 * dry run plans it (./round-plan.ts: the built-in sample runs in the plan folder), every script checked by
 * the backend's preflight (render, `bash -n`, and the scheduler's own check of each distinct request:
 * sbatch --test-only, qsub -w v), the problems printed per stage and recorded as one 'preflight' event.
 * Nothing is submitted. Returns the exit code (1 with problems).
 */
export async function preflightNextStep(engine: Engine): Promise<number> {
  const out = engine.out;
  let proj: RoundProjection;
  try {
    proj = await projectRound({ view: engine.view, backend: engine.backend, samplePolicy: engine.samplePolicy });
  } catch (err) {
    if (err instanceof LedgerError) throw Object.assign(err, { exitCode: 2 });
    throw err;
  }
  if (proj.nothing) {
    out.line(`preflight: ${proj.nothing}`);
    return 0;
  }
  const specs = proj.stages.flatMap((s) => s.specs);
  const first = proj.stages[0];
  const round = first?.round ?? 0;
  const covered = proj.stages.map((s) => stageId(s.round, s.stage)).join(', ');
  if (specs.length === 0) {
    out.line(`preflight: ${covered || 'nothing'}: no batch script to check (ratchet runs the built-in sample itself)`);
    if (proj.stoppedBecause) out.line(`not planned further: ${proj.stoppedBecause}`);
    await engine.append({ type: 'preflight', round, stage: first?.stage ?? 'sample', stages: proj.stages.map((s) => s.stage), backend: engine.backend.name, tasks: 0, scheduler_checks: 0, problems: [] });
    return 0;
  }
  const report: PreflightReport = await preflight(engine.backend, specs);
  await engine.append({
    type: 'preflight',
    round,
    stage: first.stage,
    stages: proj.stages.map((s) => s.stage),
    backend: report.backend,
    tasks: report.tasks,
    scheduler_checks: report.schedulerChecks,
    problems: report.problems,
  });
  out.line(`preflight of round ${round} (${covered}): ${report.tasks} task(s), backend ${report.backend}, ${report.schedulerChecks} scheduler check(s)`);
  out.line(`  ${report.note}`);
  if (proj.stoppedBecause) out.line(`  not planned further: ${proj.stoppedBecause}`);
  out.line(`  the round's tasks may use at most ${proj.coreHoursAtMost.toFixed(1)} core-hours; scripts in ${proj.planRel}/`);
  const byStage = problemsByStage(report);
  if (byStage.size === 0) {
    out.line(`no problems found; nothing was submitted`);
    return 0;
  }
  for (const [stage, list] of byStage) {
    for (const pr of list) out.line(`${stage}: ${pr.kind}: ${pr.task && pr.kind !== 'scheduler' ? `${pr.task}: ` : ''}${pr.message.replace(/\n/g, '\n    ')}`);
  }
  out.line(`${report.problems.length} problem(s); nothing was submitted. Fix them, then run again (with --preflight to check first)`);
  return 1;
}
