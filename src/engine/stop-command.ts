/**
 * `ratchet stop CAMPAIGN [TARGET]` as a library call. The request (who, when, what, why) is written
 * first (.ratchet/stop/). With no ratchet run holding the campaign's lock, this process takes the lock,
 * holds the scope's tasks, cancels their queued and running jobs with one backend call and records it
 * all. With a run holding the lock, that run records it at its next poll; this process waits for it
 * (`waitS`), and when the run has not taken the request by then, cancels the jobs itself (one scheduler
 * call) and leaves the request to be recorded by that run or the next one.
 * Exit codes: 0 done (or handed to the running ratchet), 1 the lock could not be taken nor handed over, 2 bad input.
 */
import { existsSync, readFileSync, writeFileSync, renameSync } from 'node:fs';
import { Journal, LedgerError } from '../ledger/journal.js';
import { LockError, processState, readLock } from '../ledger/lock.js';
import { hostname } from 'node:os';
import { Engine } from './context.js';
import { isBuiltinJob } from './execute.js';
import { abs, taskDirRel } from './layout.js';
import { Output } from './output.js';
import { prepare } from './run.js';
import { samplePolicy } from './sample-policy.js';
import { current, foldEvents, taskPhase } from './state.js';
import { foldCampaign } from './status.js';
import { applyStopRequests, normalScope, requestHere, StopError, stopTargets, tasksInScope, writeStopRequest, type StopRequest } from './stop.js';
import type { Submission } from '../backends/backend.js';
import { shellQuote } from '../backends/shell.js';

export interface StopOptions {
  campaign: string;
  /** "r1/label", "r1/label/0003", or undefined for the whole campaign. */
  target?: string;
  reason?: string;
  backend?: string;
  /** Seconds to wait for a running ratchet to record the stop (default 30). */
  waitS?: number;
  out?: Output;
  error?: (m: string) => void;
}

export async function stopCampaign(o: StopOptions): Promise<{ exitCode: number }> {
  const out = o.out ?? new Output(process.stdout);
  const error = o.error ?? ((m: string) => process.stderr.write(`ratchet stop: ${m}\n`));
  if (o.reason !== undefined && /[\r\n]/.test(o.reason)) {
    error('--reason: expected one line of text');
    return { exitCode: 2 };
  }
  const prep = await prepare({ campaign: o.campaign, backend: o.backend }, error);
  if (typeof prep === 'number') return { exitCode: prep };
  const { view, backend } = prep;
  let scope: string;
  let state;
  try {
    scope = normalScope(o.target);
    try {
      state = (await foldCampaign(view.dir)).state;
    } catch (err) {
      if (err instanceof LedgerError) {
        error(err.message);
        return { exitCode: 2 };
      }
      throw err;
    }
    tasksInScope(state, scope);
  } catch (err) {
    if (err instanceof StopError) {
      error(err.message);
      return { exitCode: 2 };
    }
    throw err;
  }
  const lockNow = await readLock(view.dir);
  const runGoing = lockNow !== null && !(lockNow.host === hostname() && typeof lockNow.pid === 'number' && processState(lockNow.pid) === 'dead');
  if (!runGoing && stopTargets(state, scope).length === 0) {
    out.line(`${scope === 'campaign' ? `campaign ${view.name}` : scope}: no task is queued, running or waiting to run, and no ratchet run is going on; nothing to stop (nothing recorded)`);
    return { exitCode: 0 };
  }
  const req = requestHere(scope, o.reason?.trim() || undefined);
  const path = writeStopRequest(view.dir, req);
  const what = scope === 'campaign' ? `campaign ${view.name}` : scope;

  // No run holds the lock (or its holder is gone): record and cancel here.
  let journal: Journal | undefined;
  try {
    journal = await Journal.open(view.dir, { log: (m) => out.line(m) });
  } catch (err) {
    if (!(err instanceof LockError)) throw err;
  }
  if (journal) {
    try {
      const engine = new Engine(view, journal, foldEvents(journal.history), backend, out, samplePolicy);
      const done = await applyStopRequests(engine);
      const mine = done.at(-1);
      if (mine && mine.held.length === 0) out.line(`${what}: nothing was queued, running or waiting to run; nothing held`);
      if (mine && mine.held.length > 0) out.line(`release with: ${releaseHint(o.campaign, mine.held)}`);
    } finally {
      await journal.close();
    }
    return { exitCode: 0 };
  }

  // A run holds the lock: it records the stop at its next poll.
  const lock = await readLock(view.dir);
  const holder = `ratchet pid ${lock?.pid ?? '?'} on ${lock?.host ?? '?'}`;
  out.line(`${what}: ${holder} is running this campaign; asking it to stop (${path})`);
  const deadline = Date.now() + (o.waitS ?? 30) * 1000;
  while (existsSync(path) && Date.now() < deadline) {
    if (lock?.host === hostname() && typeof lock.pid === 'number' && processState(lock.pid) === 'dead') break;
    await new Promise((r) => setTimeout(r, 200));
  }
  if (!existsSync(path)) {
    const after = (await foldCampaign(view.dir)).state;
    const held = [...after.tasks.values()].filter((t) => t.held && t.held.how === 'stop' && t.held.reason.includes(req.at));
    out.line(`${holder} recorded the stop: ${held.length} task(s) held`);
    if (held.length > 0) out.line(`release with: ${releaseHint(o.campaign, held.map((t) => t.id))}`);
    return { exitCode: 0 };
  }
  // Not taken in time (a run busy submitting, on another host, or gone): stop the spending now.
  const targets = stopTargets((await foldCampaign(view.dir)).state, scope).filter((t) => taskPhase(t) === 'submitted' && !isBuiltinJob(current(t).job_id));
  const subs: Submission[] = targets.map((t) => ({ id: t.id, job_id: current(t).job_id!, dir: abs(view.dir, taskDirRel(t.round, t.stage, t.name)) }));
  if (subs.length > 0) {
    try {
      await backend.cancel(subs);
    } catch (err) {
      error(`cancelling ${subs.length} job(s): ${(err as Error).message}`);
      return { exitCode: 1 };
    }
    markCancelled(path, req, subs.map((s) => s.job_id));
  }
  out.line(`${holder} has not taken the request within ${o.waitS ?? 30} s; cancelled ${subs.length} queued or running job(s) now`);
  out.line(`the stop and the holds are recorded by that run at its next poll, or by the next ratchet run (the request stays in ${path})`);
  return { exitCode: 0 };
}

/** `ratchet retry CAMPAIGN TASK` for one task, `... STAGE` for tasks of one stage (one command per stage). */
export function releaseHint(campaignArg: string, ids: string[]): string {
  const stages = [...new Set(ids.map((id) => (ids.length === 1 ? id : id.split('/').slice(0, 2).join('/'))))];
  return stages.map((s) => `ratchet retry ${shellQuote(campaignArg)} ${s}`).join('; ');
}

/** Note in the request which jobs were cancelled already (when the file is still there). */
function markCancelled(path: string, req: StopRequest, ids: string[]): void {
  if (!existsSync(path)) return;
  try {
    const now = JSON.parse(readFileSync(path, 'utf8')) as StopRequest;
    const tmp = `${path}.tmp`;
    writeFileSync(tmp, `${JSON.stringify({ ...req, ...now, cancelled_jobs: ids })}\n`);
    renameSync(tmp, path);
  } catch {
    // Taken meanwhile: the run that took it cancels what is left (a second cancel of an ended job is harmless).
  }
}
