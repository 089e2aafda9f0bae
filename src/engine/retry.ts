/**
 * `ratchet retry`: mark tasks for a new attempt, and release held tasks (stopped by `ratchet stop` or
 * cancelled with the scheduler's own command: 'task_released' with the person's user name first). For each: the last attempt's exit record and logs are
 * moved to <task dir>/attempts/<n>/, then a 'task_retry' event (manual: the task's count of failures
 * starts again) is written; the run that follows starts it. Retrying a gate-blocked stage with no
 * failed task judges it again ('stage_regate'), e.g. after its limits were changed in the campaign.
 */
import { join } from 'node:path';
import { archiveAttempt } from '../backends/task-files.js';
import type { Engine } from './context.js';
import { readTaskJson, taskDirOf } from './execute.js';
import { exists } from './fsutil.js';
import { parseTaskRef, stageId, taskId, type Stage } from './ids.js';
import { current, frontier, stageRecord, taskPhase, type TaskRecord } from './state.js';
import { killPoint } from './testhook.js';
import { personName } from './stop.js';
import { hostname } from 'node:os';

/** A retry that cannot be done as asked (exit code 2). */
export class RetryError extends Error {
  readonly exitCode = 2;
  constructor(message: string) {
    super(message);
    this.name = 'RetryError';
  }
}

export interface RetryMarks {
  tasks: string[];
  regate?: string;
  /** Held tasks released (by the person who ran retry). */
  released: string[];
}

/** What a retry would do: the tasks to run again, or the stage to judge again. Writes nothing. */
export interface RetryPlan {
  /** Tasks to run again as new attempts (held ones that had run included). */
  targets: TaskRecord[];
  /** Held tasks to release ('task_released'); those that never ran start as they are. */
  release?: TaskRecord[];
  regate?: { round: number; stage: Stage };
}

/** Check a retry request against the state; throws RetryError (exit code 2) when it cannot be done. */
export async function planRetry(engine: Engine, refText: string): Promise<RetryPlan> {
  const ref = parseTaskRef(refText);
  if (!ref) throw new RetryError(`expected a task like r0/label/0003 or a stage like r0/label, found ${JSON.stringify(refText)}`);
  const sid = stageId(ref.round, ref.stage);
  const st = stageRecord(engine.state, ref.round, ref.stage);
  if (!st) throw new RetryError(`${sid} has not been planned yet, so there is nothing to retry (ratchet status shows where the campaign stands)`);
  const at = frontier(engine.state);
  if (at.round !== ref.round || at.stage !== ref.stage) {
    throw new RetryError(
      `${sid} passed its gate and the campaign has moved on to ${stageId(at.round, at.stage)}; only the stage where the campaign stands can be retried`,
    );
  }
  const blocked = st.gate?.verdict === 'fail';
  let targets: TaskRecord[];
  if (ref.task !== undefined) {
    const t = st.tasks.find((k) => k.name === ref.task);
    if (!t) {
      const names = st.tasks.map((k) => k.name);
      const shown = names.length > 6 ? `${names.slice(0, 3).join(', ')} ... ${names.slice(-2).join(', ')}` : names.join(', ');
      throw new RetryError(`${taskId(ref.round, ref.stage, ref.task)} is not a task of ${sid} (its tasks: ${shown || 'none'})`);
    }
    const p = taskPhase(t);
    if (p === 'submitted' || p === 'queued' || p === 'running')
      throw new RetryError(`${t.id} is still ${t.held ? 'being stopped' : 'running'}; wait for it to end (ratchet status shows it)`);
    if (t.held) return p === 'planned' ? { targets: [], release: [t] } : { targets: [t], release: [t] };
    if (p === 'planned') throw new RetryError(`${t.id} has not run yet; ratchet run starts it`);
    if (p === 'succeeded' && !blocked) throw new RetryError(`${t.id} succeeded and ${sid} is not blocked by its gate; nothing to retry`);
    targets = [t];
  } else {
    targets = st.tasks.filter((t) => {
      const p = taskPhase(t);
      return p !== 'succeeded' && p !== 'planned' && p !== 'submitted' && p !== 'queued' && p !== 'running';
    });
    const release = st.tasks.filter((t) => t.held && taskPhase(t) !== 'submitted');
    if (release.length > 0) return { targets, release };
    if (targets.length === 0 && blocked) {
      // Tasks that succeeded but left an expected output unwritten run again too.
      for (const t of st.tasks) {
        const json = await readTaskJson(engine, t);
        for (const rel of Object.values(json.outputs)) {
          if (!(await exists(join(taskDirOf(engine, t), rel)))) {
            targets.push(t);
            break;
          }
        }
      }
    }
    if (targets.length === 0) {
      if (blocked) return { targets: [], regate: { round: ref.round, stage: ref.stage } };
      const running = st.tasks.filter((t) => taskPhase(t) === 'submitted').length;
      throw new RetryError(
        running > 0
          ? `${sid} has ${running} task(s) still running and none failed; nothing to retry`
          : `${sid} has no failed task and is not blocked by its gate; nothing to retry`,
      );
    }
  }
  return { targets };
}

/** Carry out a checked retry: old records moved aside, then one 'task_retry' event per task (or 'stage_regate'). */
export async function applyRetry(engine: Engine, plan: RetryPlan): Promise<RetryMarks> {
  if (plan.regate) {
    await engine.append({ type: 'stage_regate', round: plan.regate.round, stage: plan.regate.stage });
    return { tasks: [], regate: stageId(plan.regate.round, plan.regate.stage), released: [] };
  }
  // Released first: who let the held tasks go on is recorded before any of them runs again.
  const release = plan.release ?? [];
  if (release.length > 0) {
    const by = personName();
    await engine.appendMany(release.map((t) => ({ type: 'task_released' as const, task: t.id, by, host: hostname() })));
  }
  for (const t of plan.targets) {
    const archived = await archiveAttempt(taskDirOf(engine, t));
    killPoint('archived');
    await engine.append({
      type: 'task_retry',
      task: t.id,
      attempt: current(t).n + 1,
      reason: release.includes(t) ? `released by ${personName()} (it was held)` : 'retry requested',
      manual: true,
      ...(archived ? { archived: engine.rel(archived) } : {}),
    });
  }
  return { tasks: plan.targets.map((t) => t.id), released: release.map((t) => t.id) };
}

/** planRetry then applyRetry. */
export async function markRetry(engine: Engine, refText: string): Promise<RetryMarks> {
  return applyRetry(engine, await planRetry(engine, refText));
}
