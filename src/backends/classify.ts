/**
 * Failure classes and retry decisions: pure functions, no I/O.
 *
 * 1. A scheduler command that failed (submit, query, cancel) is `transient` (time-out, controller busy
 *    or unreachable: try again after a back-off) or `permanent` (bad request: report it).
 * 2. A task attempt that ended in anything but success is decided on: resubmit as it was (node failure,
 *    preemption, a lost or cancelled job), resubmit with a longer walltime or more memory (escalation,
 *    within the campaign's caps), retry a failed command up to the stage's attempts, or block the stage.
 *
 * The patterns are the messages the schedulers' client commands print (sources beside each list); any
 * message not matched is permanent, so a real error is never hidden by retries.
 */
import type { Resources, TaskState } from './backend.js';

export type CommandFailureKind = 'transient' | 'permanent';

export interface CommandOutcome {
  exitCode: number | null;
  stdout: string;
  stderr: string;
  /** The command was stopped at its time limit (submit_timeout). */
  timedOut: boolean;
  /** The command could not be started (e.g. ENOENT: not installed / not on PATH). */
  spawnError?: string;
}

/**
 * Messages that mean "try again later". Sources: Slurm 22.05 client messages seen in sbatch/squeue
 * (slurm_strerror texts "Socket timed out on send/recv operation", "Unable to contact slurm controller
 * (connect failure)", "Resource temporarily unavailable" for EAGAIN, "Slurm temporarily unable to accept
 * job" (ESLURM_NOT_SUPPORTED is not one of these)); PBS Professional client messages ("cannot connect to
 * server", "pbs_iff: cannot connect", "End of File" when the server drops the connection); LSF messages
 * ("LSF is down", "batch system daemon not responding", "mbatchd is not responding", "Please wait");
 * Grid Engine commlib messages ("unable to contact qmaster", "failed receiving gdi request").
 * Common practice: these are the messages sites tell users to retry on; recalled from the clients'
 * output, not from one manual table.
 */
export const TRANSIENT_PATTERNS: readonly RegExp[] = [
  /socket timed out/i,
  /timed? ?out/i,
  /slurm_load_jobs error: (unable to contact|socket timed out|resource temporarily unavailable|slurm controller)/i,
  /unable to contact slurm controller/i,
  /resource temporarily unavailable/i,
  /temporarily unable to accept job/i,
  /controller (is )?(busy|not responding|down)/i,
  /connection refused/i,
  /connection reset/i,
  /transport endpoint is not connected/i,
  /zero bytes were transmitted or received/i,
  /try again/i,
  /cannot connect to (pbs )?server/i,
  /pbs_iff: cannot connect/i,
  /\bend of file\b/i,
  /communication failure/i,
  /lsf is down/i,
  /daemon (is )?not responding/i,
  /mbatchd (is )?not responding/i,
  /please wait/i,
  /unable to contact qmaster/i,
  /failed receiving gdi request/i,
  /commlib error/i,
];

/** Transient or permanent, with the reason in plain words. */
export function classifyCommandFailure(o: CommandOutcome): { kind: CommandFailureKind; reason: string } {
  if (o.spawnError !== undefined) return { kind: 'permanent', reason: o.spawnError };
  const text = `${o.stderr}\n${o.stdout}`.trim();
  const first = text.split('\n').find((l) => l.trim() !== '')?.trim() ?? '';
  if (o.timedOut) return { kind: 'transient', reason: `timed out${first ? `: ${first}` : ''}` };
  if (TRANSIENT_PATTERNS.some((re) => re.test(text))) return { kind: 'transient', reason: first || `exit code ${o.exitCode}` };
  return { kind: 'permanent', reason: first || `exit code ${o.exitCode} and no message` };
}

/**
 * Back-off before retry number `retry` (1, 2, ...): base x 2^(retry-1), capped, with up to 20 %
 * random jitter (common practice: spreads retries of many clients hitting a busy controller).
 */
export function backoffMs(retry: number, baseMs = 2000, capMs = 60_000, random: () => number = Math.random): number {
  const raw = Math.min(capMs, baseMs * 2 ** Math.max(0, retry - 1));
  return Math.round(raw * (1 + 0.2 * random()));
}

// ---------------------------------------------------------------------------------------------
// Task attempts

/** The campaign's rules for attempts (backend.* and the stage's attempts). */
export interface RetryPolicy {
  /** Runs a task may have in all for command failures (the stage's `attempts`, first run included). */
  attempts: number;
  /** backend.walltime_factor (1: never escalate). */
  walltimeFactor: number;
  /** backend.walltime_max in seconds (undefined: no cap, then at most `attempts` escalations). */
  walltimeMaxS?: number;
  /** backend.memory_factor (1: never escalate, out of memory is reported). */
  memoryFactor: number;
  /** backend.memory_max in MiB (undefined: no cap, then at most `attempts` escalations). */
  memoryMaxMb?: number;
  /** Resubmissions "as they were" (node failure, preemption, lost, cancelled) before the stage is blocked. Default 5. */
  requeueLimit?: number;
}

/** What happened to the task so far (counted from the ledger's attempts, this one included). */
export interface AttemptHistory {
  /** Attempts that ended `failed` (non-zero exit). */
  failures: number;
  /** Attempts that ended walltime. */
  walltimes: number;
  /** Attempts that ended out_of_memory. */
  memoryKills: number;
  /** Attempts that ended node_failure, preempted, lost or cancelled. */
  requeues: number;
}

export type Decision =
  | { action: 'done' }
  | { action: 'wait' }
  | { action: 'resubmit'; failure: FailureClass; resources: Resources; changed: Partial<Pick<Resources, 'walltime_s' | 'memory_mb'>>; reason: string }
  | { action: 'block'; failure: FailureClass; reason: string };

/** The failure classes of an attempt (the terminal TaskStates other than success). */
export type FailureClass = Exclude<TaskState, 'queued' | 'running' | 'succeeded'>;

export const FAILURE_CLASSES: readonly FailureClass[] = ['failed', 'walltime', 'out_of_memory', 'node_failure', 'preempted', 'cancelled', 'lost'];

function hms(seconds: number): string {
  const s = Math.round(seconds);
  const two = (n: number) => String(n).padStart(2, '0');
  return `${two(Math.floor(s / 3600))}:${two(Math.floor((s % 3600) / 60))}:${two(s % 60)}`;
}

/**
 * Decide what to do after an attempt ended in `state` with `resources`.
 * - succeeded: done. queued/running: wait.
 * - walltime: resubmit with walltime x walltimeFactor, capped at walltimeMaxS; blocked when the factor
 *   is 1, when the walltime already is at the cap, or (no cap) after `attempts` escalations.
 * - out_of_memory: resubmit with memory x memoryFactor (capped) when memoryFactor > 1 and the task asked
 *   for a memory size; otherwise blocked with a hint.
 * - node_failure, preempted, lost, cancelled: resubmit as it was, at most requeueLimit times.
 * - failed: resubmit as it was while failures < attempts; then blocked with the log's last lines.
 * `history` counts this attempt too.
 */
export function decide(state: TaskState, resources: Resources, history: AttemptHistory, policy: RetryPolicy, logTail = ''): Decision {
  const tail = logTail.trim() ? `; last lines of the task's log:\n${logTail.replace(/\s+$/, '')}` : '';
  switch (state) {
    case 'succeeded':
      return { action: 'done' };
    case 'queued':
    case 'running':
      return { action: 'wait' };
    case 'walltime': {
      const w = resources.walltime_s;
      if (policy.walltimeFactor <= 1) {
        return { action: 'block', failure: state, reason: `exceeded its walltime ${hms(w)}; backend.walltime_factor is 1, so it is not resubmitted: raise the stage's walltime or set walltime_factor above 1` };
      }
      const cap = policy.walltimeMaxS;
      if (cap !== undefined && w >= cap) {
        return { action: 'block', failure: state, reason: `exceeded its walltime ${hms(w)}, which is already backend.walltime_max (${hms(cap)}): raise walltime_max or make the task shorter` };
      }
      if (cap === undefined && history.walltimes > policy.attempts) {
        return { action: 'block', failure: state, reason: `exceeded its walltime ${history.walltimes} times (last ${hms(w)}); with no backend.walltime_max, escalation stops after the stage's ${policy.attempts} attempt(s)` };
      }
      const next = Math.ceil(cap === undefined ? w * policy.walltimeFactor : Math.min(cap, w * policy.walltimeFactor));
      return {
        action: 'resubmit',
        failure: state,
        resources: { ...resources, walltime_s: next },
        changed: { walltime_s: next },
        reason: `exceeded its walltime ${hms(w)}; resubmitted with ${hms(next)} (x${policy.walltimeFactor}${cap !== undefined && next === cap ? ', the cap' : ''})`,
      };
    }
    case 'out_of_memory': {
      const m = resources.memory_mb;
      if (policy.memoryFactor <= 1) {
        return { action: 'block', failure: state, reason: `ran out of memory${m !== undefined ? ` (${m} MiB)` : ''}; backend.memory_factor is 1, so it is not resubmitted: raise the stage's memory or set memory_factor above 1${tail}` };
      }
      if (m === undefined) {
        return { action: 'block', failure: state, reason: `ran out of memory with the site's default memory; set the stage's resources.memory so that it can be escalated${tail}` };
      }
      const cap = policy.memoryMaxMb;
      if (cap !== undefined && m >= cap) {
        return { action: 'block', failure: state, reason: `ran out of memory at ${m} MiB, which is already backend.memory_max (${cap} MiB)${tail}` };
      }
      if (cap === undefined && history.memoryKills > policy.attempts) {
        return { action: 'block', failure: state, reason: `ran out of memory ${history.memoryKills} times (last ${m} MiB); with no backend.memory_max, escalation stops after the stage's ${policy.attempts} attempt(s)${tail}` };
      }
      const next = Math.ceil(cap === undefined ? m * policy.memoryFactor : Math.min(cap, m * policy.memoryFactor));
      return {
        action: 'resubmit',
        failure: state,
        resources: { ...resources, memory_mb: next },
        changed: { memory_mb: next },
        reason: `ran out of memory at ${m} MiB; resubmitted with ${next} MiB (x${policy.memoryFactor}${cap !== undefined && next === cap ? ', the cap' : ''})`,
      };
    }
    case 'node_failure':
    case 'preempted':
    case 'lost':
    case 'cancelled': {
      const limit = policy.requeueLimit ?? 5;
      const what = { node_failure: 'its node failed', preempted: 'it was preempted', lost: 'it was lost (no exit record and the scheduler no longer knows it)', cancelled: 'it was cancelled' }[state];
      if (history.requeues > limit) {
        return { action: 'block', failure: state, reason: `${what}; it was resubmitted ${limit} times already for such reasons, so the stage is blocked: check the cluster${tail}` };
      }
      return { action: 'resubmit', failure: state, resources, changed: {}, reason: `${what}; resubmitted as it was` };
    }
    case 'failed': {
      if (history.failures < policy.attempts) {
        return { action: 'resubmit', failure: state, resources, changed: {}, reason: `failed (attempt ${history.failures} of ${policy.attempts}); run again` };
      }
      return { action: 'block', failure: state, reason: `failed ${history.failures} time(s), the stage's attempts (${policy.attempts})${tail}` };
    }
  }
}

/** Plain words for an exit code as bash reports it (128 + n for a signal). */
export function describeExitCode(code: number): string {
  if (code === 0) return 'exit code 0';
  if (code === 127) return 'exit code 127 (command not found)';
  if (code === 126) return 'exit code 126 (command found but not executable)';
  const sig = code > 128 && code < 160 ? SIGNALS[code - 128] : undefined;
  if (sig) return `exit code ${code} (killed by ${sig})`;
  return `exit code ${code}`;
}

const SIGNALS: Record<number, string> = { 1: 'SIGHUP', 2: 'SIGINT', 6: 'SIGABRT', 9: 'SIGKILL', 10: 'SIGUSR1', 11: 'SIGSEGV', 12: 'SIGUSR2', 13: 'SIGPIPE', 14: 'SIGALRM', 15: 'SIGTERM', 24: 'SIGXCPU' };
