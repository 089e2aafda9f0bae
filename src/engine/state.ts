/**
 * The campaign's state: the ledger's events folded in order. Pure and O(1) per event (a Map lookup
 * or two), so `ratchet status` stays fast on long ledgers. Events of unknown types are skipped, so
 * newer ledgers still fold.
 */
import type { LedgerEvent } from '../ledger/journal.js';
import type { TaskState } from '../backends/backend.js';
import { STAGES, type Stage, isStage } from './ids.js';
import type {
  ArtifactEvent,
  CampaignRevisionEvent,
  CampaignEndedEvent,
  CampaignIdentityEvent,
  RunEndedEvent,
  RunStartedEvent,
  StageGatedEvent,
  TaskEndedEvent,
} from './events.js';

export interface Attempt {
  /** 1-based. */
  n: number;
  job_id?: string;
  backend?: string;
  submitted_at?: string;
  ended?: TaskEndedEvent & { at: string };
  /** Why this attempt exists (for attempts after the first). */
  reason?: string;
  /** Asked for by `ratchet retry` (the count of failed attempts starts again here). */
  manual?: boolean;
  /** Resources changed for this attempt by an escalation (task_retry.resources). */
  changed?: { walltime_s?: number; memory_mb?: number };
  /** The resources it was submitted with (task_submitted.resources). */
  resources?: { walltime_s: number; memory_mb?: number; cpus: number };
  /** Why this attempt's failure blocks the stage (task_blocked). */
  blocked?: string;
  /** Its start is recorded by a 'task_started' event (task_submitted.records_start). */
  records_start?: boolean;
  /** When it was first seen running (task_started). */
  started_at?: string;
  /** The stage's programs as this attempt ran them (task_submitted.programs). */
  programs?: Record<string, string>;
}

export interface TaskRecord {
  /** "r0/label/0003". */
  id: string;
  round: number;
  stage: Stage;
  name: string;
  /** attempts[k] is attempt k + 1; the last one is current. */
  attempts: Attempt[];
  /** A person stopped or cancelled it (task_held): never started again until released (task_released). */
  held?: { how: 'stop' | 'cancelled'; by?: string; reason: string; at: string; attempt: number };
}

export interface StageRecord {
  round: number;
  stage: Stage;
  tasks: TaskRecord[];
  inputs: string[];
  planned_at: string;
  /** The latest verdict since the last retry, if any. */
  gate?: StageGatedEvent & { seq: number; at: string };
  /** Verdicts ever given (history, for status and the report). */
  verdicts: number;
  /**
   * A failed validate verdict the campaign let the round go past (rounds.explore_unvalidated): the round
   * explores but is not validated and never counts toward convergence. Cleared with the verdict.
   */
  waived?: { reason: string; at: string; steps: Record<string, number> };
  /** The campaign revision in force when the stage was planned (absent before revisions were recorded). */
  revision?: number;
}

/** One recorded version of the campaign file (campaign_revision), with the person's decision when one was asked. */
export interface RevisionRecord extends Pick<CampaignRevisionEvent, 'sha256' | 'number' | 'previous' | 'changes' | 'affects_data' | 'round'> {
  decision_needed: boolean;
  at: string;
  seq: number;
  decided?: { choice: 'accept' | 'relabel'; by: string; round: number; rounds: number[]; at: string };
}

export interface RoundRecord {
  round: number;
  stages: Partial<Record<Stage, StageRecord>>;
}

export interface CampaignState {
  rounds: RoundRecord[];
  tasks: Map<string, TaskRecord>;
  /** The latest artifact registered at each path (relative to the campaign dir). */
  byPath: Map<string, ArtifactEvent & { seq: number }>;
  ended?: CampaignEndedEvent & { at: string };
  /** Rounds whose end was judged (round_judged, or campaign_ended). */
  judged: Set<number>;
  lastRun?: { started: RunStartedEvent & { seq: number; at: string }; ended?: RunEndedEvent & { at: string } };
  /** The campaign file that owns this folder's state (campaign_identity), when recorded. */
  identity?: CampaignIdentityEvent & { seq: number; at: string };
  /** The campaign revisions in ledger order; the last is in force. */
  revisions: RevisionRecord[];
  /** Label stages that relabel earlier rounds' frames (revision_decided, choice relabel), by round. */
  relabel: Map<number, { sha256: string; number: number; rounds: number[] }>;
  events: number;
  lastSeq: number;
}

export function emptyState(): CampaignState {
  return { rounds: [], tasks: new Map(), byPath: new Map(), judged: new Set(), revisions: [], relabel: new Map(), events: 0, lastSeq: 0 };
}

function roundRecord(s: CampaignState, round: number): RoundRecord {
  while (s.rounds.length <= round) s.rounds.push({ round: s.rounds.length, stages: {} });
  return s.rounds[round];
}

export function stageRecord(s: CampaignState, round: number, stage: Stage): StageRecord | undefined {
  return s.rounds[round]?.stages[stage];
}

function currentAttempt(t: TaskRecord): Attempt {
  return t.attempts[t.attempts.length - 1];
}

/** Fold one event into the state (mutates and returns it). */
export function applyEvent(s: CampaignState, e: LedgerEvent): CampaignState {
  s.events++;
  s.lastSeq = e.seq;
  switch (e.type) {
    case 'stage_planned': {
      const round = e.round as number;
      const stage = e.stage as string;
      if (!isStage(stage)) break;
      const rr = roundRecord(s, round);
      if (rr.stages[stage]) break; // planned twice (cannot happen through the engine): keep the first
      const names = (e.tasks as string[]) ?? [];
      const rec: StageRecord = { round, stage, tasks: [], inputs: (e.inputs as string[]) ?? [], planned_at: e.at, verdicts: 0 };
      const inForce = s.revisions[s.revisions.length - 1];
      if (inForce) rec.revision = inForce.number;
      for (const name of names) {
        const t: TaskRecord = { id: `r${round}/${stage}/${name}`, round, stage, name, attempts: [{ n: 1 }] };
        rec.tasks.push(t);
        s.tasks.set(t.id, t);
      }
      rr.stages[stage] = rec;
      break;
    }
    case 'task_submitted': {
      const t = s.tasks.get(e.task as string);
      if (!t) break;
      const a = attemptFor(t, e.attempt as number);
      a.job_id = e.job_id as string;
      a.backend = e.backend as string;
      a.submitted_at = e.at;
      if (e.resources && typeof e.resources === 'object') a.resources = e.resources as Attempt['resources'];
      if (e.records_start === true) a.records_start = true;
      if (e.programs && typeof e.programs === 'object') a.programs = e.programs as Record<string, string>;
      break;
    }
    case 'task_started': {
      const t = s.tasks.get(e.task as string);
      if (!t) break;
      const a = attemptFor(t, e.attempt as number);
      if (a.started_at === undefined) a.started_at = e.at;
      break;
    }
    case 'campaign_identity':
      // The first one counts (a second cannot come through the engine).
      if (!s.identity && typeof e.file === 'string') s.identity = e as unknown as CampaignIdentityEvent & { seq: number; at: string };
      break;
    case 'task_ended': {
      const t = s.tasks.get(e.task as string);
      if (!t) break;
      const a = attemptFor(t, e.attempt as number);
      a.ended = e as unknown as TaskEndedEvent & { at: string };
      break;
    }
    case 'task_retry': {
      const t = s.tasks.get(e.task as string);
      if (!t) break;
      const n = e.attempt as number;
      if (currentAttempt(t).n < n) {
        const changed = e.resources && typeof e.resources === 'object' ? { changed: e.resources as Attempt['changed'] } : {};
        t.attempts.push({ n, reason: e.reason as string, ...(e.manual === true ? { manual: true } : {}), ...changed });
      }
      const st = stageRecord(s, t.round, t.stage);
      if (st) {
        st.gate = undefined;
        st.waived = undefined;
      }
      break;
    }
    case 'task_held': {
      const t = s.tasks.get(e.task as string);
      if (t) t.held = { how: e.how === 'cancelled' ? 'cancelled' : 'stop', ...(typeof e.by === 'string' ? { by: e.by } : {}), reason: String(e.reason ?? ''), at: e.at, attempt: e.attempt as number };
      break;
    }
    case 'task_released': {
      const t = s.tasks.get(e.task as string);
      if (t) t.held = undefined;
      break;
    }
    case 'task_blocked': {
      const t = s.tasks.get(e.task as string);
      if (t) attemptFor(t, e.attempt as number).blocked = e.reason as string;
      break;
    }
    case 'stage_gated': {
      const st = stageRecord(s, e.round as number, e.stage as Stage);
      if (!st) break;
      st.gate = e as unknown as StageGatedEvent & { seq: number; at: string };
      st.verdicts++;
      st.waived = undefined;
      break;
    }
    case 'validation_waived': {
      const st = stageRecord(s, e.round as number, 'validate');
      if (st?.gate?.verdict === 'fail') st.waived = { reason: e.reason as string, at: e.at, steps: (e.steps as Record<string, number>) ?? {} };
      break;
    }
    case 'stage_regate': {
      const st = stageRecord(s, e.round as number, e.stage as Stage);
      if (st) {
        st.gate = undefined;
        st.waived = undefined;
      }
      break;
    }
    case 'artifact': {
      const a = e as unknown as ArtifactEvent & { seq: number };
      s.byPath.set(a.path, a);
      break;
    }
    case 'campaign_ended':
      s.ended = e as unknown as CampaignEndedEvent & { at: string };
      s.judged.add(e.round as number);
      break;
    case 'round_judged':
      s.judged.add(e.round as number);
      break;
    case 'campaign_resumed':
      s.ended = undefined;
      break;
    case 'campaign_revision': {
      if (typeof e.sha256 !== 'string') break;
      s.revisions.push({
        sha256: e.sha256,
        number: typeof e.number === 'number' ? e.number : s.revisions.length + 1,
        ...(typeof e.previous === 'string' ? { previous: e.previous } : {}),
        changes: Array.isArray(e.changes) ? (e.changes as RevisionRecord['changes']) : [],
        affects_data: Array.isArray(e.affects_data) ? (e.affects_data as string[]) : [],
        round: typeof e.round === 'number' ? e.round : 0,
        decision_needed: e.decision_needed === true,
        at: e.at,
        seq: e.seq,
      });
      break;
    }
    case 'revision_decided': {
      const r = [...s.revisions].reverse().find((k) => k.sha256 === e.sha256);
      if (!r || r.decided) break;
      const choice = e.choice === 'relabel' ? 'relabel' : 'accept';
      const rounds = Array.isArray(e.rounds) ? (e.rounds as number[]) : [];
      r.decided = { choice, by: String(e.by ?? ''), round: e.round as number, rounds, at: e.at };
      if (choice === 'relabel') s.relabel.set(e.round as number, { sha256: r.sha256, number: r.number, rounds });
      break;
    }
    case 'run_started':
      s.lastRun = { started: e as unknown as RunStartedEvent & { seq: number; at: string } };
      break;
    case 'run_ended':
      if (s.lastRun) s.lastRun.ended = e as unknown as RunEndedEvent & { at: string };
      break;
    default:
      break;
  }
  return s;
}

/** The attempt numbered n, created when the ledger mentions it before a task_retry (older ledgers). */
function attemptFor(t: TaskRecord, n: number): Attempt {
  const k = (Number.isInteger(n) && n >= 1 ? n : 1) - 1;
  while (t.attempts.length <= k) t.attempts.push({ n: t.attempts.length + 1 });
  return t.attempts[k];
}

export function foldEvents(events: Iterable<LedgerEvent>): CampaignState {
  const s = emptyState();
  for (const e of events) applyEvent(s, e);
  return s;
}

// ---------------------------------------------------------------------------------------------
// Derived views

/** Where a task's current attempt stands. 'planned': never started; 'submitted': started, no end yet. */
export type TaskPhase = 'planned' | 'submitted' | TaskState;

export function taskPhase(t: TaskRecord): TaskPhase {
  const a = currentAttempt(t);
  if (a.ended) return a.ended.state;
  return a.job_id !== undefined ? 'submitted' : 'planned';
}

export function current(t: TaskRecord): Attempt {
  return currentAttempt(t);
}

/**
 * A started-but-not-ended task ('submitted') that has not begun to run: waiting for a free slot
 * (local --jobs) or in the scheduler's queue. Only attempts whose start is recorded can tell;
 * older ledgers' submitted tasks count as running.
 */
export function isWaiting(t: TaskRecord): boolean {
  const a = currentAttempt(t);
  return a.ended === undefined && a.job_id !== undefined && a.records_start === true && a.started_at === undefined;
}

/**
 * Terminal states that say nothing about the task itself (the run was interrupted, the job vanished,
 * the node died, the job was preempted): the engine starts a new attempt on its own.
 */
export const RERUN_BY_ITSELF: ReadonlySet<TaskPhase> = new Set<TaskPhase>(['cancelled', 'lost', 'node_failure', 'preempted']);

/** Terminal states that block the stage until `ratchet retry`. */
export function isFailure(p: TaskPhase): boolean {
  return p !== 'planned' && p !== 'submitted' && p !== 'queued' && p !== 'running' && p !== 'succeeded' && !RERUN_BY_ITSELF.has(p);
}

export type StagePhase =
  | 'pending' // not planned
  | 'ready' // planned, some tasks to start
  | 'running' // some tasks started, none to start
  | 'failed' // some task failed for good: blocked until retry
  | 'held' // a person stopped or cancelled some task: blocked until it is released (retry)
  | 'collect' // all tasks succeeded: collect outputs, then judge
  | 'passed'
  | 'blocked'; // the gate failed

export interface StageSummary {
  phase: StagePhase;
  counts: Partial<Record<TaskPhase, number>>;
  /** Tasks that failed and may not run again without `ratchet retry`. */
  failed: TaskRecord[];
  /** Tasks a person stopped or cancelled (ended, or never started): not started until released. */
  held: TaskRecord[];
  /** Tasks to start: never started, or ended in a way that calls for a new attempt. */
  toStart: TaskRecord[];
  running: TaskRecord[];
}

/** Failed attempts (failed, walltime, out of memory) since the last `ratchet retry` of the task. */
export function countedFailures(t: TaskRecord): number {
  let n = 0;
  for (let k = t.attempts.length - 1; k >= 0; k--) {
    const a = t.attempts[k];
    if (a.ended && isFailure(a.ended.state)) n++;
    if (a.manual) break;
  }
  return n;
}

export interface SummaryOptions {
  /** Runs a task may have (the first included) before a failure blocks the stage (default 1). */
  attempts?: number;
  /** Tasks the engine restarted by itself in this process (they are not restarted twice). */
  restarted?: ReadonlySet<string>;
}

/**
 * Where a stage stands. A failed task is started again while it has failed fewer than `attempts`
 * times; a cancelled, lost, preempted or node-failed task is started again once per process.
 */
export function summarizeStage(st: StageRecord | undefined, opts: SummaryOptions = {}): StageSummary {
  const counts: Partial<Record<TaskPhase, number>> = {};
  const failed: TaskRecord[] = [];
  const toStart: TaskRecord[] = [];
  const running: TaskRecord[] = [];
  const held: TaskRecord[] = [];
  if (!st) return { phase: 'pending', counts, failed, held, toStart, running };
  const limit = opts.attempts ?? 1;
  for (const t of st.tasks) {
    const p = taskPhase(t);
    counts[p] = (counts[p] ?? 0) + 1;
    if (p === 'submitted' || p === 'queued' || p === 'running') running.push(t);
    else if (p === 'succeeded') continue;
    else if (t.held) held.push(t);
    else if (p === 'planned') toStart.push(t);
    else if (currentAttempt(t).blocked !== undefined) failed.push(t);
    else if (RERUN_BY_ITSELF.has(p)) (opts.restarted?.has(t.id) ? failed : toStart).push(t);
    else (countedFailures(t) < limit ? toStart : failed).push(t);
  }
  let phase: StagePhase;
  if (toStart.length > 0) phase = 'ready';
  else if (running.length > 0) phase = 'running';
  else if (held.length > 0) phase = 'held';
  else if (failed.length > 0) phase = 'failed';
  else if (!st.gate) phase = 'collect';
  else phase = st.gate.verdict === 'fail' && !st.waived ? 'blocked' : 'passed';
  return { phase, counts, failed, held, toStart, running };
}

/** The first stage (in run order) that has not passed: where the campaign stands. */
export function frontier(s: CampaignState): { round: number; stage: Stage } {
  for (const rr of s.rounds) {
    for (const stage of STAGES) {
      const st = rr.stages[stage];
      if (!st || !st.gate || (st.gate.verdict === 'fail' && !st.waived)) return { round: rr.round, stage };
    }
  }
  return { round: s.rounds.length, stage: 'sample' };
}
