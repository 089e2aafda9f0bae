/**
 * The events the engine writes to the ledger (`.ratchet/ledger.jsonl`). Each is one line; `seq` and
 * `at` are added by the Journal. Field names are part of the ledger's format: add, never rename.
 */
import type { ExitRecord, TaskState } from '../backends/backend.js';
import type { Stage } from './ids.js';

/** A `ratchet run` or `ratchet retry` began (after the campaign loaded and the lock was taken). */
export interface RunStartedEvent {
  type: 'run_started';
  command: 'run' | 'retry';
  backend: string;
  jobs: number;
  /** Older ledgers: the --until point (now stop_before). */
  until?: string;
  /** --stop-before POINT. */
  stop_before?: string;
  /** --stop-after POINT. */
  stop_after?: string;
  host: string;
  pid: number;
  campaign_sha256: string;
  tool_version: string;
}

/** A run ended normally or by a signal. Absent after a crash (SIGKILL, power loss). */
export interface RunEndedEvent {
  type: 'run_ended';
  outcome: 'finished' | 'advanced' | 'blocked' | 'waiting' | 'stopped' | 'interrupted' | 'error';
  exit_code: number;
  signal?: string;
  /** The message of an error that ended the run. */
  error?: string;
}

/**
 * A stage's task directories (task.json, run.sh, inputs) are written. `tasks` are the task names in
 * order ("0000", ... or condition names). `inputs` are the artifact ids the stage reads.
 */
export interface StagePlannedEvent {
  type: 'stage_planned';
  round: number;
  stage: Stage;
  tasks: string[];
  inputs: string[];
}

/** A task attempt was started (local) or submitted (cluster); written before the next one is. */
export interface TaskSubmittedEvent {
  type: 'task_submitted';
  /** "r0/label/0003". */
  task: string;
  attempt: number;
  job_id: string;
  backend: string;
  /** The job was found queued or running (submitted before a crash), not submitted again. */
  adopted?: true;
  /**
   * A 'task_started' event follows when the task is seen running: until then it waits for a free slot
   * (local --jobs) or in the scheduler's queue. Absent in ledgers written before starts were recorded.
   */
  records_start?: true;
  /** The stage's programs (campaign key `programs`) as run by this attempt: path as written -> "sha256:<hex>". */
  programs?: Record<string, string>;
}

/**
 * A submitted task attempt was first seen running (its process started, or the scheduler runs it).
 * Written at most once per attempt; a task that ends before it is seen running gets none.
 */
export interface TaskStartedEvent {
  type: 'task_started';
  task: string;
  attempt: number;
}

/**
 * Which campaign file owns this folder's state (the ledger and rounds/). Written first when the ledger
 * is created, or at the first run of a ledger written before campaigns were recorded (`adopted`).
 * Another campaign file in the same folder is refused.
 */
export interface CampaignIdentityEvent {
  type: 'campaign_identity';
  /** The campaign's `name`. */
  name: string;
  /** The campaign file's name relative to the campaign folder (what identifies it). */
  file: string;
  /** Absolute path of the campaign file when recorded (for information: the folder may move). */
  path: string;
  /** The ledger held events before the campaign was recorded (written by an older ratchet). */
  adopted?: true;
}

/** A task attempt reached a terminal state. */
export interface TaskEndedEvent {
  type: 'task_ended';
  task: string;
  attempt: number;
  state: TaskState;
  exit_code?: number;
  start?: string;
  end?: string;
  host?: string;
  /** Plain words for anything but success. */
  reason?: string;
  /** Cancelled by a person outside ratchet (the scheduler's cancel command, a signal to a local task): the task is held. */
  outside?: true;
}

/**
 * `ratchet stop`: who stopped what, when and why. `scope` is "campaign", a stage ("r1/label") or a
 * task ("r1/label/0003"); `tasks` the tasks held by it (each also gets a 'task_held' event).
 */
export interface TasksStoppedEvent {
  type: 'tasks_stopped';
  scope: string;
  /** The user name of the person who asked (os.userInfo()). */
  by: string;
  reason?: string;
  /** When the request was made (it is recorded by the next process holding the lock). */
  requested_at: string;
  host: string;
  pid: number;
  tasks: string[];
  /** Jobs cancelled on the backend (queued or running when the stop was applied). */
  cancelled: number;
}

/** A task a person stopped or cancelled: never started again until a person releases it (ratchet retry). */
export interface TaskHeldEvent {
  type: 'task_held';
  task: string;
  attempt: number;
  /** 'stop': by ratchet stop; 'cancelled': the job was cancelled outside ratchet. */
  how: 'stop' | 'cancelled';
  /** The person, where known (ratchet stop records the user name; an outside cancel: the scheduler's account of it). */
  by?: string;
  reason: string;
}

/** A held task released by a person (`ratchet retry`); a new attempt follows when it had run. */
export interface TaskReleasedEvent {
  type: 'task_released';
  task: string;
  by: string;
  host: string;
}

/** A task will run again as attempt `attempt` (by `ratchet retry`, or at once after a cancel or a lost job). */
export interface TaskRetryEvent {
  type: 'task_retry';
  task: string;
  attempt: number;
  reason: string;
  /** Asked for by `ratchet retry` (the task's count of failed attempts starts again). */
  manual?: boolean;
  /** Where the previous attempt's exit record and logs were moved, relative to the campaign dir. */
  archived?: string;
}

/** One gate's judgement, as kept in a stage's verdict. */
export interface GateRecord {
  gate: string;
  verdict: 'pass' | 'warn' | 'fail';
  reasons: string[];
  figures: Record<string, unknown>;
  /** The task whose outputs were judged, when the gate looked at one task. */
  task?: string;
}

/** The verdict on a stage's outputs. The campaign advances past a stage only on pass or warn. */
export interface StageGatedEvent {
  type: 'stage_gated';
  round: number;
  stage: Stage;
  verdict: 'pass' | 'warn' | 'fail';
  /** Plain words: why it failed or warned (empty for a clean pass). */
  reasons: string[];
  gates: GateRecord[];
  /** Stage-level figures (e.g. frames selected, confident fraction per condition). */
  figures?: Record<string, unknown>;
  /** One line that sums a passing stage up. */
  summary?: string;
}

/** `ratchet retry` on a gate-blocked stage with no failed task: judge it again. */
export interface StageRegateEvent {
  type: 'stage_regate';
  round: number;
  stage: Stage;
}

/** The campaign is over: converged, or out of rounds. */
export interface CampaignEndedEvent {
  type: 'campaign_ended';
  state: 'converged' | 'exhausted';
  round: number;
  reasons: string[];
  /** Conditions that held the campaign back (exhausted). */
  holding: string[];
}

/**
 * A round's end was judged and the campaign goes on (not converged, rounds left). A round that ends
 * the campaign gets 'campaign_ended' instead: one event either way, so the judgement is never half-written.
 */
export interface RoundJudgedEvent {
  type: 'round_judged';
  round: number;
  state: 'continue';
  reasons: string[];
  holding: string[];
}

/** An exhausted campaign goes on because its round limit was raised. */
export interface CampaignResumedEvent {
  type: 'campaign_resumed';
  reason: string;
}

/** Registered output (the ledger helper's artifact contract). */
export interface ArtifactEvent {
  type: 'artifact';
  id: string;
  path: string;
  role: string;
  task?: string;
  inputs: string[];
  command?: string;
  campaign_sha256: string;
  tool_version: string;
  bytes: number;
  kind: 'file' | 'dir';
  round?: number;
  stage?: Stage;
}

/**
 * A failed validate verdict that the campaign's `rounds.explore_unvalidated` lets the round go past: the
 * round explores with short runs and labels what it finds, is marked as not validated, and never counts
 * toward convergence.
 */
export interface ValidationWaivedEvent {
  type: 'validation_waived';
  round: number;
  reason: string;
  /** How many rounds in a row (this one included) went on without validation. */
  in_a_row: number;
  /** The MD steps each condition runs in this round (condition name -> steps). */
  steps: Record<string, number>;
}

/**
 * The campaign file's content changed since the revision in force (or is seen for the first time). Its
 * bytes are kept in `.ratchet/revisions/<sha256>.yaml`, written before this event.
 */
export interface CampaignRevisionEvent {
  type: 'campaign_revision';
  sha256: string;
  /** 1, 2, ... in ledger order. */
  number: number;
  /** The revision in force before (absent for the first). */
  previous?: string;
  /** Key paths that differ from `previous` (parsed, defaults filled in); empty for the first. */
  changes: { path: string; old?: unknown; new?: unknown }[];
  /** Paths (of `changes`, or against `compared_with`) that affect data already made. */
  affects_data: string[];
  /** The round at which the revision came into force (the first stage not yet passed). */
  round: number;
  /** `affects_data` was measured against this revision (the last settled one) instead of `previous`. */
  compared_with?: string;
  /** Rounds already had labels: no run goes on until a person decides (revision_decided). */
  decision_needed?: true;
  /** Why the changes could not be worked out (the previous revision's copy is missing or unreadable). */
  unknown?: string;
}

/** A person's choice on a revision that affects data already made: keep the labels, or label them again. */
export interface RevisionDecidedEvent {
  type: 'revision_decided';
  sha256: string;
  choice: 'accept' | 'relabel';
  /** The user name of the person who chose (os.userInfo()). */
  by: string;
  /** The round whose label stage relabels (relabel), or the round in force when accepted. */
  round: number;
  /** The rounds whose labels are relabeled (relabel only). */
  rounds?: number[];
}

export type EngineEvent =
  | RunStartedEvent
  | RunEndedEvent
  | StagePlannedEvent
  | TaskSubmittedEvent
  | TaskStartedEvent
  | TaskEndedEvent
  | TaskRetryEvent
  | TasksStoppedEvent
  | TaskHeldEvent
  | TaskReleasedEvent
  | StageGatedEvent
  | StageRegateEvent
  | CampaignEndedEvent
  | RoundJudgedEvent
  | CampaignResumedEvent
  | CampaignIdentityEvent
  | ValidationWaivedEvent
  | CampaignRevisionEvent
  | RevisionDecidedEvent
  | ArtifactEvent;

export type { ExitRecord };
