/**
 * Running a stage's tasks: new attempts where needed (the old attempt's records moved aside first),
 * scripts rendered again from task.json and the current campaign, submission through the backend with
 * each job id recorded before the next task is submitted, the built-in sampling run in process, and
 * the wait for every task to end (recording each end as it is seen).
 */
import { readFile, rename } from 'node:fs/promises';
import { hostname } from 'node:os';
import { join } from 'node:path';
import type { Submission, TaskSpec, TaskStatus } from '../backends/backend.js';
import { archiveAttempt, writeTaskFiles, TASK_FILE } from '../backends/task-files.js';
import { readExitRecord, STDERR_FILE, EXIT_RECORD_FILE } from '../backends/exit-record.js';
import type { Engine } from './context.js';
import type { TaskEndedEvent, TaskStartedEvent } from './events.js';
import { stageId, type Stage } from './ids.js';
import { abs, taskDirRel } from './layout.js';
import { materialize, taskSpec, writeTasks, type TaskJson } from './plan.js';
import type { SampleRequest } from './sample-policy.js';
import { SAMPLE_OUTPUT, SAMPLE_SUMMARY } from './stages/sample.js';
import { STAGE_DEFS } from './stages/index.js';
import { current, isWaiting, taskPhase, stageRecord, RERUN_BY_ITSELF, type TaskRecord } from './state.js';
import { hashPrograms } from './programs.js';
import { writeFileAtomic } from './fsutil.js';
import { killPoint } from './testhook.js';
import { effectiveResources, guardBudget } from './attempts.js';
import { applyStopRequests, withOutsideHolds } from './stop.js';

export function taskDirOf(engine: Engine, t: TaskRecord): string {
  return abs(engine.view.dir, taskDirRel(t.round, t.stage, t.name));
}

const BUILTIN_PREFIX = 'builtin.';

export function isBuiltinJob(jobId: string | undefined): boolean {
  return jobId !== undefined && jobId.startsWith(BUILTIN_PREFIX);
}

/** The task.json of a task; planned again (and rewritten) when it is missing or unreadable. */
export async function readTaskJson(engine: Engine, t: TaskRecord): Promise<TaskJson> {
  const dir = taskDirOf(engine, t);
  try {
    return JSON.parse(await readFile(join(dir, TASK_FILE), 'utf8')) as TaskJson;
  } catch {
    const ctx = engine.stageContext(t.round);
    const plan = await STAGE_DEFS[t.stage].plan(ctx);
    const mine = plan.tasks.filter((p) => p.name === t.name);
    if (mine.length === 0) {
      throw new Error(
        `${join(dir, TASK_FILE)} is missing and the campaign no longer plans task ${t.id}; restore the file or the campaign as it was`,
      );
    }
    const [m] = materialize(engine.view, t.round, t.stage, { ...plan, tasks: mine }, engine.backend);
    writeTasks(engine.view, [m]);
    return m.json;
  }
}

/**
 * Start the given tasks of one stage (all planned or needing a new attempt). Returns when every one
 * is submitted (cluster) or queued (local); the built-in sampling has run to its end.
 */
export async function startTasks(engine: Engine, tasks: TaskRecord[]): Promise<void> {
  // The stage's programs, hashed once for all its tasks before anything is written (a missing one is bad input).
  const programs = tasks.length > 0 ? await hashPrograms(engine.view, tasks[0].stage) : {};
  // New attempts first: move the old records aside, then say so in the ledger.
  const retries = tasks.filter((t) => current(t).ended !== undefined);
  for (const t of retries) {
    const prev = current(t);
    const phase = taskPhase(t);
    const archived = await archiveAttempt(taskDirOf(engine, t));
    killPoint('archived');
    if (RERUN_BY_ITSELF.has(phase)) engine.restartedHere.add(t.id);
    await engine.append({
      type: 'task_retry',
      task: t.id,
      attempt: prev.n + 1,
      reason: RERUN_BY_ITSELF.has(phase)
        ? `attempt ${prev.n} was ${phase}${prev.ended?.reason ? ` (${firstLine(prev.ended.reason)})` : ''}`
        : `attempt ${prev.n} ${phase}; the stage allows ${engine.view.stages[t.stage].attempts} attempt(s)`,
      ...(archived ? { archived: engine.rel(archived) } : {}),
    });
  }
  const builtin: { t: TaskRecord; json: TaskJson }[] = [];
  const specs: TaskSpec[] = [];
  const byId = new Map<string, TaskRecord>();
  for (const t of tasks) {
    const json = await readTaskJson(engine, t);
    if (json.builtin) {
      builtin.push({ t, json });
      continue;
    }
    const dir = taskDirOf(engine, t);
    const spec = taskSpec(engine.view, json, dir);
    spec.resources = effectiveResources(engine.view, t);
    await writeTaskFiles(dir, engine.backend.render(spec), json);
    specs.push(spec);
    byId.set(spec.id, t);
  }
  const resById = new Map(specs.map((x) => [x.id, x.resources]));
  if (specs.length > 0) await guardBudget(engine, specs[0].round, tasks[0].stage, specs);
  for (const b of builtin) {
    if (engine.interrupted) return;
    await runBuiltin(engine, b.t, b.json);
  }
  if (specs.length === 0) return;
  await engine.backend.submit(specs, async (s: Submission) => {
    const t = byId.get(s.id)!;
    const r = resById.get(s.id);
    await engine.append({
      type: 'task_submitted',
      task: s.id,
      attempt: current(t).n,
      job_id: s.job_id,
      backend: engine.backend.name,
      ...(s.adopted ? { adopted: true as const } : {}),
      records_start: true as const,
      ...(Object.keys(programs).length > 0 ? { programs } : {}),
      ...(r ? { resources: { walltime_s: r.walltime_s, ...(r.memory_mb !== undefined ? { memory_mb: r.memory_mb } : {}), cpus: r.cpus } } : {}),
    });
    killPoint('submitted');
  });
}

function firstLine(s: string): string {
  const l = s.split('\n')[0];
  return l.length > 200 ? `${l.slice(0, 200)}…` : l;
}

/**
 * The built-in sampling, run in this process like a task: recorded as submitted, its output written to
 * a temporary name and renamed, its summary and then its exit record written atomically, then recorded
 * as ended. A crash anywhere leaves either a complete exit record or none (then it runs again).
 */
async function runBuiltin(engine: Engine, t: TaskRecord, json: TaskJson): Promise<void> {
  const dir = taskDirOf(engine, t);
  const attempt = current(t).n;
  await engine.append({ type: 'task_submitted', task: t.id, attempt, job_id: `${BUILTIN_PREFIX}${process.pid}`, backend: 'builtin' });
  killPoint('submitted');
  const start = new Date().toISOString();
  const output = join(dir, SAMPLE_OUTPUT);
  const partial = join(dir, `.${SAMPLE_OUTPUT}.partial`);
  const sources = Object.keys(json.inputs)
    .filter((k) => k.startsWith('source_'))
    .sort((a, b) => Number(a.slice(7)) - Number(b.slice(7)))
    .map((k, i) => {
      const conds = json.params.conditions as (string | null)[] | undefined;
      const cond = conds?.[i];
      return { path: json.inputs[k], artifact: json.input_artifacts[k], ...(cond ? { condition: cond } : {}) };
    });
  const req: SampleRequest = {
    round: json.round,
    seed: json.seed,
    kind: json.params.kind === 'start' ? 'start' : 'trajectories',
    sources,
    params: json.params,
    committee: engine.view.committee,
    output: partial,
  };
  let code = 0;
  let reason: string | undefined;
  try {
    const outcome = await engine.samplePolicy(req);
    await rename(partial, output);
    await writeFileAtomic(join(dir, SAMPLE_SUMMARY), `${JSON.stringify(outcome, null, 2)}\n`);
  } catch (err) {
    code = 1;
    reason = `the sample policy failed: ${(err as Error).message}`;
    await writeFileAtomic(join(dir, STDERR_FILE), `${(err as Error).stack ?? reason}\n`);
  }
  const exit = { exit_code: code, start, end: new Date().toISOString(), host: hostname() };
  await writeFileAtomic(join(dir, EXIT_RECORD_FILE), `${JSON.stringify(exit)}\n`);
  await engine.append({
    type: 'task_ended',
    task: t.id,
    attempt,
    state: code === 0 ? 'succeeded' : 'failed',
    ...exit,
    ...(reason ? { reason } : {}),
  });
}

function terminal(s: TaskStatus['state']): boolean {
  return s !== 'queued' && s !== 'running';
}

/** The ledger event for a task seen to have ended. */
export function endedEvent(t: TaskRecord, s: TaskStatus): TaskEndedEvent {
  const e: TaskEndedEvent = { type: 'task_ended', task: t.id, attempt: current(t).n, state: s.state };
  if (s.exit) {
    e.exit_code = s.exit.exit_code;
    e.start = s.exit.start;
    e.end = s.exit.end;
    e.host = s.exit.host;
  }
  if (s.reason) e.reason = s.reason;
  if (s.outside && s.state === 'cancelled') e.outside = true;
  return e;
}

/** Ask where the given started tasks stand (built-in ones from their exit record alone). */
export async function pollTasks(engine: Engine, tasks: TaskRecord[]): Promise<Map<string, TaskStatus>> {
  const out = new Map<string, TaskStatus>();
  const subs: Submission[] = [];
  for (const t of tasks) {
    const a = current(t);
    const dir = taskDirOf(engine, t);
    if (isBuiltinJob(a.job_id)) {
      const exit = await readExitRecord(dir);
      out.set(t.id, exit
        ? { id: t.id, state: exit.exit_code === 0 ? 'succeeded' : 'failed', exit, job_id: a.job_id }
        : { id: t.id, state: 'lost', job_id: a.job_id, reason: 'the built-in sampling was interrupted before it finished' });
    } else {
      // Never seen running (task_started is recorded for attempts that record starts): a job that
      // vanishes without a trace was cancelled while it waited.
      subs.push({ id: t.id, job_id: a.job_id!, dir, ...(a.records_start === true && a.started_at === undefined ? { neverStarted: true } : {}) });
    }
  }
  if (subs.length > 0) for (const s of await engine.backend.poll(subs)) out.set(s.id, s);
  return out;
}

export interface WaitResult {
  /** Tasks still queued or running (a cluster run that does not follow, or an interrupt). */
  outstanding: number;
}

/**
 * Wait until every started task of the stage has ended, recording each end as soon as it is seen,
 * and showing progress. With a backend that has no drain() (a cluster) and follow=false, polls once.
 */
export async function waitForStage(engine: Engine, round: number, stage: Stage, follow: boolean): Promise<WaitResult> {
  const label = stageId(round, stage);
  const st = stageRecord(engine.state, round, stage)!;
  let first = true;
  for (;;) {
    // A stop asked for from another terminal (ratchet stop) is recorded before the next poll.
    await applyStopRequests(engine);
    const running = st.tasks.filter((t) => taskPhase(t) === 'submitted');
    if (running.length === 0) break;
    const statuses = await pollTasks(engine, running);
    const ended: TaskEndedEvent[] = [];
    const endedTasks: TaskRecord[] = [];
    const started: TaskStartedEvent[] = [];
    for (const t of running) {
      const s = statuses.get(t.id);
      if (s && terminal(s.state)) {
        ended.push(endedEvent(t, s));
        endedTasks.push(t);
      } else if (s?.state === 'running' && current(t).started_at === undefined && !isBuiltinJob(current(t).job_id)) {
        started.push({ type: 'task_started', task: t.id, attempt: current(t).n });
      }
    }
    // Ends first: a slot freed by one task is what let the next one start.
    await engine.appendMany([...withOutsideHolds(engine.state, ended), ...started]);
    for (let k = 0; k < ended.length; k++) {
      const e = ended[k];
      if (e.state !== 'succeeded') engine.out.line(`${endedTasks[k].id} ${engine.out.word(e.state)}${e.reason ? `: ${indentMore(e.reason)}` : ''}`);
    }
    showProgress(engine, round, stage);
    if (first) {
      killPoint('running');
      first = false;
    }
    const left = st.tasks.filter((t) => taskPhase(t) === 'submitted').length;
    if (left === 0) break;
    if (engine.interrupted) return { outstanding: left };
    if (!follow && engine.backend.drain === undefined) return { outstanding: left };
    // Poll less often when many tasks run: about one exit-record read per task per 100 ms at most
    // (local). On a cluster the exit records are read every 2 s, or every 10 ms per outstanding task
    // when more (a stat and a small read each, on the shared file system), so a stage advances soon
    // after its last task ends; the backend asks the scheduler itself only once per poll interval
    // (its answer is cached in between), so this costs no scheduler calls.
    const nextDelay = (engine.backend as { nextPollDelayMs?: () => number }).nextPollDelayMs;
    const interval =
      !engine.backend.drain && nextDelay
        ? Math.min(nextDelay.call(engine.backend), Math.max(2000, left * 10))
        : Math.min(5000, Math.max(engine.backend.drain ? 100 : 2000, left / 10));
    await Promise.race([sleep(interval), engine.whenInterrupted()]);
  }
  engine.out.endProgress(label);
  return { outstanding: 0 };
}

function indentMore(s: string): string {
  return s.replace(/\n/g, '\n    ');
}

export function showProgress(engine: Engine, round: number, stage: Stage, force = false): void {
  const st = stageRecord(engine.state, round, stage);
  if (!st) return;
  let done = 0;
  let running = 0;
  let waiting = 0;
  let failed = 0;
  for (const t of st.tasks) {
    const p = taskPhase(t);
    if (p === 'submitted') {
      if (isWaiting(t)) waiting++;
      else running++;
    } else if (p !== 'planned') {
      done++;
      if (p !== 'succeeded') failed++;
    }
  }
  const detail = `${running} running${waiting ? `, ${waiting} waiting` : ''}${failed ? `, ${failed} not succeeded` : ''}`;
  engine.out.progress(stageId(round, stage), done, st.tasks.length, detail, force);
}

export function sleep(ms: number): Promise<void> {
  return new Promise((r) => setTimeout(r, ms));
}

/** Stop every task of this campaign that is still queued or running, and record how each ended. */
export async function stopOutstanding(engine: Engine): Promise<string[]> {
  const live = [...engine.state.tasks.values()].filter((t) => taskPhase(t) === 'submitted');
  // A cluster's jobs stay with the scheduler: an interrupt stops polling only (the next run follows them).
  if (live.length === 0 || engine.backend.drain === undefined) return [];
  const subs = live.filter((t) => !isBuiltinJob(current(t).job_id)).map((t) => ({ id: t.id, job_id: current(t).job_id!, dir: taskDirOf(engine, t) }));
  await engine.backend.cancel(subs);
  const statuses = await pollTasks(engine, live);
  const ended: TaskEndedEvent[] = [];
  for (const t of live) {
    const s = statuses.get(t.id);
    if (s && terminal(s.state)) ended.push(endedEvent(t, s));
  }
  await engine.appendMany(withOutsideHolds(engine.state, ended));
  return ended.map((e) => e.task);
}
