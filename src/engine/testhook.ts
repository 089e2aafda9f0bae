/**
 * TEST HOOK (not for users): crash the engine on purpose, so tests can check that a campaign resumes
 * correctly after a SIGKILL at a chosen point. This is the only place that reads the variable.
 *
 *   RATCHET_TEST_KILL_AT=<point>[:<k>]
 *
 * kills the process with SIGKILL the k-th time (default 1) it reaches the named point. Points:
 *   append          right after a ledger event is on disk (k counts this process's events)
 *   planned         after a stage's task directories are written, before its 'stage_planned' event
 *   submitted       a task's 'task_submitted' event is written, the task not yet started
 *   running         after the first poll of a stage's running tasks (they run on, orphaned)
 *   hashed          an output has been hashed, its 'artifact' event not yet written
 *   merged          a stage's merged output is written, not yet registered
 *   archived        a retried task's old records were moved aside, its 'task_retry' event not yet written
 *   gated           the gate has been computed, its verdict not yet written
 *   judging         a round's simulate stage has its verdict, the round is not yet judged (converged or not)
 * Unset (always, outside tests): every call is a no-op.
 */

interface KillSpec {
  point: string;
  k: number;
}

function parse(text: string | undefined): KillSpec | undefined {
  if (!text) return undefined;
  const m = /^([a-z-]+)(?::(\d+))?$/.exec(text.trim());
  if (!m) return undefined;
  return { point: m[1], k: m[2] === undefined ? 1 : Number(m[2]) };
}

const spec = parse(process.env.RATCHET_TEST_KILL_AT);
const reached = new Map<string, number>();

/** Called at each crash-sensitive point of the engine. */
export function killPoint(point: string): void {
  if (spec === undefined || spec.point !== point) return;
  const n = (reached.get(point) ?? 0) + 1;
  reached.set(point, n);
  if (n === spec.k) process.kill(process.pid, 'SIGKILL');
}
