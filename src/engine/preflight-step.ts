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

/** Run the preflight of the next step, print it, record it; returns the exit code (1 with problems). */
export async function preflightNextStep(engine: Engine): Promise<number> {
  const out = engine.out;
  const next = await nextStepSpecs(engine);
  if (typeof next === 'string') {
    out.line(`preflight: ${next}`);
    return 0;
  }
  const sid = stageId(next.round, next.stage);
  if (next.specs.length === 0) {
    out.line(`preflight: ${sid} has no batch script to check (ratchet runs it itself)`);
    await engine.append({ type: 'preflight', round: next.round, stage: next.stage, backend: engine.backend.name, tasks: 0, scheduler_checks: 0, problems: [] });
    return 0;
  }
  const report: PreflightReport = await preflight(engine.backend, next.specs);
  await engine.append({
    type: 'preflight',
    round: next.round,
    stage: next.stage,
    backend: report.backend,
    tasks: report.tasks,
    scheduler_checks: report.schedulerChecks,
    problems: report.problems,
  });
  out.line(`preflight ${sid}: ${report.tasks} task(s), backend ${report.backend}, ${report.schedulerChecks} scheduler check(s)`);
  out.line(`  ${report.note}`);
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
