/**
 * A whole round planned in a scratch folder, from wherever the campaign stands, without running anything
 * but ratchet's own cheap step: what `run --dry-run` shows and `run --preflight` checks.
 *
 * The scratch folder (<campaign>/.ratchet/plan/<time>/) stands in for the campaign folder: the stages
 * that already passed are linked into it read-only (rounds/rK/<stage> -> the real folder), the built-in
 * sample runs for real into it (it is cheap and ratchet's own), and every later stage of the round is
 * planned from it as a run would plan it. Outputs that only a real task can make (labels, models) stand
 * in as placeholder artifacts held in memory, so the next stage can be planned; nothing is written to
 * the ledger. Each task's task.json and run.sh are written into the scratch folder with the paths of the
 * real campaign folder, as a run would render them.
 */
import { existsSync, mkdirSync, readdirSync, readFileSync, symlinkSync, writeFileSync } from 'node:fs';
import { dirname, join, sep } from 'node:path';
import type { Backend, TaskSpec } from '../backends/backend.js';
import { SCRIPT_FILE, TASK_FILE } from '../backends/task-files.js';
import { LedgerError, readLedger } from '../ledger/journal.js';
import { collectStage } from './collect.js';
import { bringInputsInside, Engine, MemorySink } from './context.js';
import { startTasks } from './execute.js';
import { STAGES, stageId, type Stage } from './ids.js';
import { abs, PLAN_DIR, stageDirRel, taskDirRel } from './layout.js';
import { BufferOutput } from './output.js';
import { materialize, taskSpec, writeTasks, type MaterialTask, type TaskJson } from './plan.js';
import type { SamplePolicy } from './sample-policy.js';
import { STAGE_DEFS } from './stages/index.js';
import { labelFiles } from './stages/label.js';
import { foldEvents, frontier, stageRecord, summarizeStage, type CampaignState } from './state.js';
import type { CampaignView } from './view.js';

export interface ProjectedStage {
  round: number;
  stage: Stage;
  /** 'planned': planned here; 'to start': planned by an earlier run, these tasks would start; 'ran': the built-in sample ran here. */
  how: 'planned' | 'to start' | 'ran';
  /** Task ids and the run.sh written for each (relative to the campaign folder), none for a built-in task. */
  tasks: { id: string; script?: string }[];
  /** The specs a backend would be given (real paths), for the preflight. */
  specs: TaskSpec[];
  command?: string;
  notes: string[];
}

export interface RoundProjection {
  /** The scratch folder, relative to the campaign folder. */
  planRel: string;
  stages: ProjectedStage[];
  /** Why the projection stops where it does (a sample command must run first, the stage is blocked ...). */
  stoppedBecause?: string;
  /** Something the caller reports instead of a plan (the campaign ended, a round waits to be judged). */
  nothing?: string;
  /** Core-hours the round's tasks may use at most: walltime x cpus per task, summed. */
  coreHoursAtMost: number;
}

export interface ProjectOptions {
  view: CampaignView;
  backend: Backend;
  samplePolicy: SamplePolicy;
  /** Stop the projection before this stage (of the frontier's round), e.g. from --stop-before. */
  stopAt?: { round: number; stage: Stage };
}

/** Replace the scratch folder's prefix by the campaign folder's in every string of a task.json. */
function relocate<T>(value: T, from: string, to: string): T {
  return JSON.parse(JSON.stringify(value), (_k, v: unknown) => (typeof v === 'string' && (v === from || v.startsWith(from + '/')) ? to + v.slice(from.length) : v)) as T;
}

/** Plan the rest of the frontier's round in a scratch folder. Throws LedgerError for an unreadable ledger. */
export async function projectRound(o: ProjectOptions): Promise<RoundProjection> {
  const real = o.view;
  const { events } = await readLedger(real.dir);
  const state: CampaignState = foldEvents(events);
  const stamp = new Date().toISOString().replace(/[:.]/g, '-');
  const planRel = `${PLAN_DIR}/${stamp}`;
  const scratch = abs(real.dir, planRel);
  const result: RoundProjection = { planRel, stages: [], coreHoursAtMost: 0 };
  if (state.ended && !(state.ended.state === 'exhausted' && real.maxRounds > state.ended.round + 1)) {
    result.nothing = `the campaign has ended (${state.ended.state} in round ${state.ended.round}); nothing would run`;
    return result;
  }
  const p = frontier(state);
  if (p.stage === 'sample' && p.round > 0 && !state.judged.has(p.round - 1)) {
    result.nothing = `next step: judge round ${p.round - 1} (converged, out of rounds, or on to round ${p.round}); no task runs`;
    return result;
  }
  if (p.round >= real.maxRounds) {
    result.nothing = `the round limit (${real.maxRounds}) is reached; a run would record the campaign as exhausted`;
    return result;
  }
  mkdirSync(scratch, { recursive: true });
  // The scratch campaign: the same view with the scratch folder as its home. The campaign folder's own
  // files (start structures, programs, templates, inputs/) and the stages that passed are linked in.
  for (const entry of readdirSync(real.dir)) {
    // inputs/ is made afresh in the scratch folder (bringInputsInside copies outside start files there).
    if (entry === '.ratchet' || entry === 'rounds' || entry === 'inputs') continue;
    symlinkSync(join(real.dir, entry), join(scratch, entry));
  }
  const inside = (path: string): string => (path.startsWith(real.dir + sep) ? scratch + path.slice(real.dir.length) : path);
  const view: CampaignView = bringInputsInside(
    { ...real, dir: scratch, start: real.start.map(inside), conditions: real.conditions.map((c) => ({ ...c, start: inside(c.start) })) },
    false,
  );
  for (const rr of state.rounds) {
    for (const stage of STAGES) {
      const st = rr.stages[stage];
      const passed = st?.gate && (st.gate.verdict !== 'fail' || st.waived);
      const from = abs(real.dir, stageDirRel(rr.round, stage));
      if (!passed || !existsSync(from)) continue;
      const to = abs(scratch, stageDirRel(rr.round, stage));
      mkdirSync(dirname(to), { recursive: true });
      symlinkSync(from, to, 'dir');
    }
  }
  const engine = new Engine(view, new MemorySink(state.lastSeq), state, o.backend, new BufferOutput(), o.samplePolicy);
  const round = p.round;
  const placeholder = async (path: string, role: string, task?: string): Promise<void> => {
    await engine.register({ path, role, inputs: [], ...(task ? { task } : {}), content: `dry-run placeholder for ${path}\n` });
  };
  for (const stage of STAGES.slice(STAGES.indexOf(p.stage))) {
    if (o.stopAt && o.stopAt.round === round && STAGES.indexOf(stage) >= STAGES.indexOf(o.stopAt.stage)) {
      result.stoppedBecause = `the plan stops before ${stageId(round, o.stopAt.stage)} (--stop-before/--stop-after)`;
      break;
    }
    const sid = stageId(round, stage);
    const command = real.stages[stage].command;
    const existing = stageRecord(state, round, stage);
    let tasks: MaterialTask[];
    let how: ProjectedStage['how'] = 'planned';
    const allOfStage: MaterialTask[] = [];
    const notes: string[] = [];
    if (existing) {
      // Planned by an earlier run: the tasks that would start now, rendered from their task.json.
      const sum = summarizeStage(existing, { attempts: real.stages[stage].attempts });
      if (sum.phase === 'failed' || sum.phase === 'blocked' || sum.phase === 'held') {
        result.stoppedBecause = `${sid} is blocked (${sum.phase}); nothing after it would run until then`;
        break;
      }
      how = 'to start';
      tasks = [];
      const toStart = new Set(sum.toStart.map((t) => t.id));
      for (const t of existing.tasks) {
        const dir = abs(real.dir, taskDirRel(round, stage, t.name));
        let json: TaskJson;
        try {
          json = JSON.parse(readFileSync(join(dir, TASK_FILE), 'utf8')) as TaskJson;
        } catch {
          if (toStart.has(t.id)) notes.push(`${t.id}: ${join(dir, TASK_FILE)} is missing; a run would plan it again`);
          continue;
        }
        const m: MaterialTask = { name: t.name, id: t.id, dir: abs(scratch, taskDirRel(round, stage, t.name)), json: relocate(json, real.dir, scratch), files: {} };
        allOfStage.push(m);
        if (toStart.has(t.id)) tasks.push(m);
      }
      if (sum.running.length > 0) notes.push(`${sum.running.length} task(s) were started by an earlier run; a run would wait for them`);
    } else {
      const plan = await STAGE_DEFS[stage].plan(engine.stageContext(round));
      tasks = materialize(view, round, stage, plan, o.backend);
      writeTasks(view, tasks);
      await engine.registerMany(plan.artifacts);
      await engine.append({ type: 'stage_planned', round, stage, tasks: tasks.map((t) => t.name), inputs: plan.inputs });
      notes.push(...(plan.notes ?? []));
    }
    const projected: ProjectedStage = { round, stage, how, tasks: [], specs: [], ...(command ? { command } : {}), notes };
    const builtin = tasks.length > 0 && tasks.every((t) => t.json.builtin);
    if (builtin && !existing) {
      // ratchet's own sampling: run it for real, into the scratch folder.
      await startTasks(engine, stageRecord(engine.state, round, stage)!.tasks);
      const missing = await collectStage(engine, round, stage);
      const verdict = missing.length ? null : await STAGE_DEFS[stage].gate(engine.stageContext(round));
      if (!verdict || verdict.verdict === 'fail') {
        projected.notes.push(...(missing.length ? missing : verdict!.reasons));
        result.stages.push(projected);
        result.stoppedBecause = `the built-in sample of ${sid} did not pass in the plan folder`;
        break;
      }
      await engine.append({ type: 'stage_gated', round, stage, ...verdict });
      projected.how = 'ran';
      for (const t of tasks) projected.tasks.push({ id: t.id });
      projected.notes.push(`wrote ${planRel}/${stageDirRel(round, stage)}/${tasks[0].name}/frames.xyz${verdict.reasons[0] ? ` (${verdict.reasons[0]})` : ''}`);
      result.stages.push(projected);
      continue;
    }
    if (tasks.some((t) => t.json.builtin) || (existing && stage === 'sample')) {
      result.stages.push(projected);
      result.stoppedBecause = `${sid} must run before the stages after it can be planned`;
      break;
    }
    // Every task rendered as a run would render it: the real campaign folder's paths, written in the scratch folder.
    for (const t of tasks) {
      const realDir = abs(real.dir, taskDirRel(round, stage, t.name));
      const json = relocate(t.json, scratch, real.dir);
      const spec = taskSpec(real, json, realDir);
      const script = o.backend.render(spec);
      mkdirSync(t.dir, { recursive: true });
      writeFileSync(join(t.dir, TASK_FILE), `${JSON.stringify(json, null, 2)}\n`);
      writeFileSync(join(t.dir, SCRIPT_FILE), script, { mode: 0o755 });
      projected.tasks.push({ id: t.id, script: `${planRel}/${taskDirRel(round, stage, t.name)}/${SCRIPT_FILE}` });
      projected.specs.push(spec);
      result.coreHoursAtMost += (spec.resources.walltime_s / 3600) * spec.resources.cpus;
    }
    result.stages.push(projected);
    if (stage === 'simulate') break;
    // Stand-ins for what the tasks will write, so the next stage can be planned.
    for (const t of existing ? allOfStage : tasks) {
      for (const [name, rel] of Object.entries(t.json.outputs)) await placeholder(join(t.dir, rel), t.json.output_roles[name] ?? name, t.id);
    }
    if (stage === 'label') {
      const f = labelFiles(engine.stageContext(round), round);
      await placeholder(f.train, 'training_set');
      await placeholder(f.test, 'test_set');
    }
    await engine.append({ type: 'stage_gated', round, stage, verdict: 'pass', reasons: ['assumed to pass (dry run)'], gates: [] });
  }
  return result;
}

export { LedgerError };
