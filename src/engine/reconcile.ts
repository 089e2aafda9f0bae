/**
 * Reconcile: make the ledger agree with what happened while no ratchet process was watching.
 *
 * For every task whose current attempt is recorded as started but not ended, ask the backend (which
 * reads the exit record first, then the scheduler or, locally, whether the recorded process still
 * runs): an ended task gets its 'task_ended' event; a task with no exit record and no live process is
 * recorded as 'lost' (the engine then starts it again as a new attempt); a live one is left to run.
 * A task never recorded as started but holding an exit record (run by hand) is recorded as ended:
 * a task with an exit record never runs again. A job cancelled outside ratchet (scancel, qdel, bkill, a
 * signal to a local task) is recorded cancelled and held: a person's cancel is never undone by a run.
 * Outputs on disk not yet registered are registered when their stage is collected (collect is idempotent).
 */
import { readExitRecord } from '../backends/exit-record.js';
import type { Engine } from './context.js';
import type { TaskEndedEvent } from './events.js';
import { endedEvent, pollTasks, taskDirOf } from './execute.js';
import { current, taskPhase, type TaskRecord } from './state.js';
import { withOutsideHolds } from './stop.js';

export interface ReconcileReport {
  /** Tasks found ended, by state. */
  ended: Record<string, number>;
  /** Tasks still queued or running. */
  live: number;
}

export async function reconcile(engine: Engine): Promise<ReconcileReport> {
  const started: TaskRecord[] = [];
  const planned: TaskRecord[] = [];
  for (const t of engine.state.tasks.values()) {
    const p = taskPhase(t);
    if (p === 'submitted') started.push(t);
    else if (p === 'planned') planned.push(t);
  }
  const events: TaskEndedEvent[] = [];
  if (started.length > 0) {
    const statuses = await pollTasks(engine, started);
    for (const t of started) {
      const s = statuses.get(t.id);
      if (s && s.state !== 'queued' && s.state !== 'running') events.push(endedEvent(t, s));
    }
  }
  for (const t of planned) {
    const exit = await readExitRecord(taskDirOf(engine, t));
    if (!exit) continue;
    events.push({
      type: 'task_ended',
      task: t.id,
      attempt: current(t).n,
      state: exit.exit_code === 0 ? 'succeeded' : 'failed',
      exit_code: exit.exit_code,
      start: exit.start,
      end: exit.end,
      host: exit.host,
      reason: 'found an exit record for a task ratchet had not started (run by hand?)',
    });
  }
  // A job cancelled by a person while no run watched is held (recorded in the same write).
  await engine.appendMany(withOutsideHolds(engine.state, events));
  const ended: Record<string, number> = {};
  for (const e of events) ended[e.state] = (ended[e.state] ?? 0) + 1;
  const startedIds = new Set(started.map((t) => t.id));
  return { ended, live: started.length - events.filter((e) => startedIds.has(e.task)).length };
}
