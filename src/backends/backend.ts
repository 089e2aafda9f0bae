/**
 * The one interface every backend implements (local now; slurm, pbs, lsf, sge later).
 * The engine plans tasks and writes their directories; a backend renders the batch script,
 * starts or submits it, reports states, and cancels.
 */

/** Where a task stands, as the engine sees it. Terminal states are all but queued/running. */
export type TaskState =
  | 'queued'
  | 'running'
  | 'succeeded'
  | 'failed'
  | 'walltime'
  | 'out_of_memory'
  | 'node_failure'
  | 'preempted'
  | 'cancelled'
  | 'lost';

export interface Resources {
  cpus: number;
  gpus: number;
  /** Memory in MiB, or undefined for the site default. */
  memory_mb?: number;
  /** Walltime in seconds. */
  walltime_s: number;
  partition?: string;
  account?: string;
  qos?: string;
  /** Raw extra directive lines, copied as written. */
  extra?: string[];
}

/** Everything a backend needs to render and run one task. */
export interface TaskSpec {
  /** Stable id, e.g. "r0/label/0003". */
  id: string;
  round: number;
  stage: string;
  /** Absolute path of rounds/<round>/<stage>/<task>/. */
  dir: string;
  /** The user's command line, run with bash -c inside the task directory. */
  command: string;
  /** Environment set-up lines from the campaign (module load ..., source venv), run before the command. */
  setup: string[];
  /** Environment variables exported to the command (values are quoted when rendered). */
  env: Record<string, string>;
  resources: Resources;
  /** Job name shown by the scheduler. */
  name: string;
}

/** Written by the batch script's EXIT trap to <task dir>/exit.json, even when the command fails. */
export interface ExitRecord {
  exit_code: number;
  /** ISO 8601 times. */
  start: string;
  end: string;
  host: string;
}

/** What a backend reports for a submitted task. */
export interface TaskStatus {
  id: string;
  state: TaskState;
  job_id?: string;
  exit?: ExitRecord;
  /** Plain-words reason for a non-success state (e.g. "exceeded walltime 00:10:00"). */
  reason?: string;
  /**
   * State 'cancelled' by someone other than this backend: the scheduler's cancel command (scancel, qdel,
   * bkill) or a signal to a local task. A person's decision: the engine holds the task, never resubmits it.
   */
  outside?: boolean;
}

export interface Submission {
  id: string;
  /** Scheduler job id (for local: a per-run counter or pid). Recorded in the ledger before the next submit. */
  job_id: string;
  /**
   * Absolute task directory (where exit.json is read). Backends fill it in; a caller polling or
   * cancelling submissions made by an earlier process (after a restart) must set it.
   */
  dir?: string;
  /** Set when the job was found already queued or running (submitted by a run that crashed before recording it), not submitted now. */
  adopted?: boolean;
  /**
   * The caller never saw the job running (it was queued at every look so far). A job that then leaves
   * the queue with no exit record and no trace in the scheduler's history was cancelled while it waited
   * (Slurm without accounting and Grid Engine keep no record of a waiting job that was cancelled).
   */
  neverStarted?: boolean;
}

export interface Backend {
  readonly name: string;
  /** The batch script for a task: a scheduler header (none for local) plus the common body. */
  render(task: TaskSpec): string;
  /**
   * Submit (cluster) or start (local) tasks whose scripts have been written to <dir>/run.sh.
   * onSubmitted is called once per task as soon as its job id is known, so the caller can record it
   * before anything else is submitted.
   */
  submit(tasks: TaskSpec[], onSubmitted: (s: Submission) => Promise<void> | void): Promise<void>;
  /** Current states of the given submissions, with as few scheduler calls as possible. */
  poll(submissions: Submission[]): Promise<TaskStatus[]>;
  /** Stop the given submissions. */
  cancel(submissions: Submission[]): Promise<void>;
  /** Local only: resolves when every started task has ended (a cluster backend resolves at once). */
  drain?(): Promise<void>;
}
