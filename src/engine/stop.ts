/**
 * Holds: tasks a person stopped (`ratchet stop`) or cancelled with the scheduler's own command. A held
 * task is recorded ('task_held'), shown, blocks its stage, and is never started again until a person
 * releases it (`ratchet retry`, 'task_released').
 *
 * A stop is asked for with a request file, `.ratchet/stop/<time>-<pid>.json` (who, when, what, why),
 * written before anything is cancelled. Whichever ratchet process holds the campaign's lock applies it:
 * a `ratchet run --follow` reads the folder before every poll and at every turn of the engine, so a
 * stop from another terminal reaches it within one poll; with no run holding the lock, `ratchet stop`
 * takes the lock and applies it itself. Applying: one 'tasks_stopped' event and one 'task_held' per
 * unfinished task of the scope, written first (so a task seen to end afterwards is already held), then
 * one cancel call to the backend for all the scope's queued and running jobs (the local backend stops
 * the process groups as on Ctrl-C), then their ends recorded as they are seen. The file is removed last.
 */
import { mkdirSync, readdirSync, readFileSync, renameSync, rmSync, writeFileSync } from 'node:fs';
import { hostname, userInfo } from 'node:os';
import { join } from 'node:path';
import type { Submission } from '../backends/backend.js';
import type { Engine } from './context.js';
import type { TaskEndedEvent, TaskHeldEvent, TasksStoppedEvent } from './events.js';
import { endedEvent, isBuiltinJob, pollTasks, taskDirOf } from './execute.js';
import { parseTaskRef, stageId, taskId, type Stage } from './ids.js';
import { current, stageRecord, taskPhase, type CampaignState, type TaskRecord } from './state.js';

/** Pending stop requests, relative to the campaign directory. */
export const STOP_DIR = '.ratchet/stop';

export interface StopRequest {
  /** "campaign", "r1/label" or "r1/label/0003". */
  scope: string;
  by: string;
  reason?: string;
  /** ISO time of the request. */
  at: string;
  host: string;
  pid: number;
  /** Job ids `ratchet stop` already cancelled itself (not cancelled twice). */
  cancelled_jobs?: string[];
}

/** A stop or release that cannot be done as asked (exit code 2). */
export class StopError extends Error {
  readonly exitCode = 2;
  constructor(message: string) {
    super(message);
    this.name = 'StopError';
  }
}

/** The user name recorded for a person's action. */
export function personName(): string {
  try {
    return userInfo().username;
  } catch {
    return process.env.USER ?? process.env.LOGNAME ?? 'unknown';
  }
}

/** The tasks a scope names, checked against the state; throws StopError when it names nothing known. */
export function tasksInScope(state: CampaignState, scope: string): TaskRecord[] {
  if (scope === 'campaign') return [...state.tasks.values()];
  const ref = parseTaskRef(scope);
  if (!ref) throw new StopError(`expected nothing (the whole campaign), a stage like r1/label or a task like r1/label/0003, found ${JSON.stringify(scope)}`);
  const st = stageRecord(state, ref.round, ref.stage);
  const sid = stageId(ref.round, ref.stage);
  if (!st) throw new StopError(`${sid} has not been planned, so none of its tasks can be stopped (ratchet status shows where the campaign stands)`);
  if (ref.task === undefined) return st.tasks;
  const t = st.tasks.find((k) => k.name === ref.task);
  if (!t) throw new StopError(`${taskId(ref.round, ref.stage, ref.task)} is not a task of ${sid}`);
  return [t];
}

/** The normal form of a scope as typed ("" or "campaign" -> "campaign"; "1/label" -> "r1/label"). */
export function normalScope(text: string | undefined): string {
  const t = (text ?? '').trim();
  if (t === '' || t === 'campaign') return 'campaign';
  const ref = parseTaskRef(t);
  if (!ref) throw new StopError(`expected nothing (the whole campaign), a stage like r1/label or a task like r1/label/0003, found ${JSON.stringify(text)}`);
  return ref.task === undefined ? stageId(ref.round, ref.stage) : taskId(ref.round, ref.stage, ref.task);
}

/** Tasks a stop of this scope would hold now: not succeeded and not held already. */
export function stopTargets(state: CampaignState, scope: string): TaskRecord[] {
  return tasksInScope(state, scope).filter((t) => taskPhase(t) !== 'succeeded' && !t.held);
}

// ---------------------------------------------------------------------------------------------
// Request files

export function stopDir(campaignDir: string): string {
  return join(campaignDir, STOP_DIR);
}

/** Write a request atomically; returns its path. */
export function writeStopRequest(campaignDir: string, req: StopRequest): string {
  const dir = stopDir(campaignDir);
  mkdirSync(dir, { recursive: true });
  const name = `${req.at.replace(/[:.]/g, '-')}-${req.pid}.json`;
  const path = join(dir, name);
  const tmp = join(dir, `.${name}.tmp`);
  writeFileSync(tmp, `${JSON.stringify(req)}\n`);
  renameSync(tmp, path);
  return path;
}

/** Pending requests, oldest first. An unreadable file is reported with its path and skipped (left in place). */
export function pendingStopRequests(campaignDir: string, warn?: (m: string) => void): { path: string; req: StopRequest }[] {
  let names: string[];
  try {
    names = readdirSync(stopDir(campaignDir)).filter((n) => n.endsWith('.json') && !n.startsWith('.'));
  } catch {
    return [];
  }
  const out: { path: string; req: StopRequest }[] = [];
  for (const n of names.sort()) {
    const path = join(stopDir(campaignDir), n);
    try {
      const req = JSON.parse(readFileSync(path, 'utf8')) as StopRequest;
      if (typeof req.scope !== 'string' || typeof req.by !== 'string' || typeof req.at !== 'string') throw new Error('expected the keys scope, by and at');
      out.push({ path, req });
    } catch (err) {
      warn?.(`${path}: not a stop request (${(err as Error).message}); left in place`);
    }
  }
  return out;
}

// ---------------------------------------------------------------------------------------------
// Applying a stop (by the process holding the lock)

/** Campaign-wide stops applied in this engine session: the run ends after the current step. */
const campaignStops = new WeakMap<Engine, StopRequest>();

export function campaignStopOf(engine: Engine): StopRequest | undefined {
  return campaignStops.get(engine);
}

export interface StopApplied {
  scope: string;
  held: string[];
  cancelled: number;
}

/** Apply every pending request (oldest first), removing each file once recorded. Returns what each did. */
export async function applyStopRequests(engine: Engine): Promise<StopApplied[]> {
  if (engine.dryRun) return [];
  const out: StopApplied[] = [];
  for (const { path, req } of pendingStopRequests(engine.view.dir, (m) => engine.out.line(m))) {
    let scope: string;
    try {
      scope = normalScope(req.scope);
      tasksInScope(engine.state, scope);
    } catch (err) {
      if (!(err instanceof StopError)) throw err;
      engine.out.line(`stop request ${path} by ${req.by} cannot be applied (${err.message}); removed`);
      rmSync(path, { force: true });
      continue;
    }
    out.push(await applyStop(engine, { ...req, scope }));
    rmSync(path, { force: true });
  }
  return out;
}

/** Hold the scope's unfinished tasks, cancel its queued and running jobs (one backend call), record their ends. */
export async function applyStop(engine: Engine, req: StopRequest): Promise<StopApplied> {
  const targets = stopTargets(engine.state, req.scope);
  const live = targets.filter((t) => taskPhase(t) === 'submitted');
  const why = `stopped by ${req.by} at ${req.at}${req.reason ? `: ${req.reason}` : ''}`;
  const stopped: TasksStoppedEvent = {
    type: 'tasks_stopped',
    scope: req.scope,
    by: req.by,
    ...(req.reason ? { reason: req.reason } : {}),
    requested_at: req.at,
    host: req.host,
    pid: req.pid,
    tasks: targets.map((t) => t.id),
    cancelled: live.length,
  };
  const holds: TaskHeldEvent[] = targets.map((t) => ({ type: 'task_held', task: t.id, attempt: current(t).n, how: 'stop', by: req.by, reason: why }));
  await engine.appendMany([stopped, ...holds]);
  if (req.scope === 'campaign') campaignStops.set(engine, req);
  engine.out.line(`${req.scope === 'campaign' ? 'campaign' : req.scope} ${why}; ${targets.length} task(s) held${live.length ? `, ${live.length} queued or running cancelled` : ''}`);
  if (live.length > 0) {
    const already = new Set(req.cancelled_jobs ?? []);
    const subs: Submission[] = live
      .filter((t) => !isBuiltinJob(current(t).job_id) && !already.has(current(t).job_id!))
      .map((t) => ({ id: t.id, job_id: current(t).job_id!, dir: taskDirOf(engine, t) }));
    if (subs.length > 0) await engine.backend.cancel(subs);
    await recordEnds(engine, live);
  }
  return { scope: req.scope, held: targets.map((t) => t.id), cancelled: live.length };
}

/** Poll the given started tasks once and record those that ended (with the holds of outside cancels). */
export async function recordEnds(engine: Engine, tasks: TaskRecord[]): Promise<TaskEndedEvent[]> {
  const statuses = await pollTasks(engine, tasks);
  const ended: TaskEndedEvent[] = [];
  for (const t of tasks) {
    const s = statuses.get(t.id);
    if (s && s.state !== 'queued' && s.state !== 'running') ended.push(endedEvent(t, s));
  }
  await engine.appendMany(withOutsideHolds(engine.state, ended));
  return ended;
}

/**
 * The ended events followed by a 'task_held' for every task cancelled outside ratchet (a person's
 * scancel, qdel, bkill, or a signal to a local task) that is not held already. Written in one batch,
 * so no run ever sees such a task ended and not held.
 */
export function withOutsideHolds(state: CampaignState, ended: TaskEndedEvent[]): (TaskEndedEvent | TaskHeldEvent)[] {
  const holds: TaskHeldEvent[] = [];
  for (const e of ended) {
    if (e.state !== 'cancelled' || !e.outside || state.tasks.get(e.task)?.held) continue;
    holds.push({
      type: 'task_held',
      task: e.task,
      attempt: e.attempt,
      how: 'cancelled',
      reason: `cancelled by a person outside ratchet${e.reason ? ` (${firstLine(e.reason)})` : ''}`,
    });
  }
  return holds.length ? [...ended, ...holds] : ended;
}

function firstLine(s: string): string {
  const l = s.split('\n')[0];
  return l.length > 200 ? `${l.slice(0, 200)}…` : l;
}

/** One line for a held task: who held it, how, and since when. */
export function describeHold(t: TaskRecord): string {
  const h = t.held;
  if (!h) return `${t.id} is not held`;
  return `${t.id} held: ${h.reason}${h.how === 'cancelled' ? ` (recorded ${h.at})` : ''}`;
}

/** The command that releases held tasks (a task, or every held task of a stage). */
export function releaseCommand(campaignArg: string, held: TaskRecord[], quote: (s: string) => string): string {
  const target = held.length === 1 ? held[0].id : stageId(held[0].round, held[0].stage as Stage);
  return `ratchet retry ${quote(campaignArg)} ${target}`;
}

/** For reports: where the request came from. */
export function requestHere(scope: string, reason?: string): StopRequest {
  return { scope, by: personName(), ...(reason ? { reason } : {}), at: new Date().toISOString(), host: hostname(), pid: process.pid };
}
