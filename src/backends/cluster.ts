/**
 * The part every batch-scheduler backend shares: rendering with the scheduler's directives, submission
 * of single jobs and job arrays (one call per array, job ids handed to the caller one task at a time),
 * polling with one scheduler call per cycle for all of a campaign's jobs, and cancelling.
 * What differs between Slurm, PBS, LSF and Grid Engine is a `Dialect` (slurm.ts, pbs.ts, lsf.ts, sge.ts):
 * the commands, their output formats and how their states map to ratchet's task states.
 *
 * How a task's state is decided (exit records first):
 *  1. exit.json with exit code 0: succeeded, without asking the scheduler.
 *  2. Otherwise the scheduler's view (one query per cycle, cached until the poll interval has passed,
 *     with back-off on errors and while nothing changes):
 *     - exit.json with a non-zero code: the scheduler's final state names the class (walltime, out of
 *       memory, node failure, preemption, cancel); a plain failure keeps the exit code. While the
 *       scheduler still shows the job as running, the task is reported running.
 *     - no exit.json: the scheduler's state; a job the scheduler says completed or failed gets
 *       `exitGraceS` for its exit.json to appear (shared file systems show files late).
 *  3. A job the scheduler no longer lists: its history (sacct, the job completion file, qacct ...)
 *     where the dialect has one; else the exit record's code; else `lost` (or `cancelled` when this
 *     process cancelled it).
 *  A cancel this process did not make (a person's scancel, qdel, bkill) is reported `outside`: the
 *  engine holds such a task instead of resubmitting it.
 */
import { existsSync, readFileSync } from 'node:fs';
import { userInfo } from 'node:os';
import { dirname, join } from 'node:path';
import type { Backend, ExitRecord, Resources, Submission, TaskSpec, TaskState, TaskStatus } from './backend.js';
import { ARRAYS_DIR, planUnits, singleJobName, writeArrayFiles, type SubmissionUnit } from './arrays.js';
import { classifyCommandFailure, describeExitCode, type CommandOutcome } from './classify.js';
import { DirectiveError, type ArrayRequest, type SchedulerName } from './directives.js';
import { readExitRecordSync, STDERR_FILE, tailLines } from './exit-record.js';
import { renderScript, RenderError } from './render.js';
import { SchedulerCli, SchedulerCommandError, type CommandRunner, type CommandSpec } from './scheduler-cli.js';
import { SCRIPT_FILE } from './task-files.js';
import { BackendOptionError } from './local.js';
import { loadTemplates, type ScriptTemplates } from './templates.js';

/** One job as the scheduler reports it, keyed by the id ratchet recorded (array elements included). */
export interface SchedJob {
  id: string;
  /** The scheduler's own state word (PENDING, R, DONE, qw ...). */
  state: string;
  exitCode?: number;
  /** Signal number when the scheduler reports one. */
  signal?: number;
  /** Pending reason, exit reason, failure code text ... as the scheduler words it. */
  reason?: string;
  /** When the job ended (ms since the epoch), when known. */
  end?: number;
  name?: string;
}

/** A scheduler state in ratchet's terms. `final`: the scheduler will not change it any more. */
export interface Mapped {
  state: TaskState;
  final: boolean;
  reason?: string;
}

export interface HistoryContext {
  cli: SchedulerCli;
  user: string;
}

export interface Dialect {
  readonly name: SchedulerName;
  /** Directive lines for one job or an array of `array.count` elements. */
  directives(r: Resources, name: string, array?: ArrayRequest): string[];
  /** The submit command for a script, run from `cwd`. */
  submit(script: string, cwd: string): CommandSpec;
  /** The job id (for an array: the array's id) from the submit command's output. */
  parseSubmitId(stdout: string): string | undefined;
  /** The id of element `index` (1-based) of array `arrayId`, as the status command reports it. */
  elementId(arrayId: string, index: number): string;
  /** The id to put on the status command for a recorded job id (an element's array id). */
  queryIdOf(jobId: string): string;
  /** The status command for these ids, or (ids undefined) for all of the user's jobs. */
  query(ids: string[] | undefined, user: string): CommandSpec;
  /** Parse the status command's output; undefined when the output is not a valid answer. */
  parseQuery(o: CommandOutcome): SchedJob[] | undefined;
  map(job: SchedJob): Mapped;
  /** Jobs the scheduler no longer lists: ask its history, where there is one. */
  history?(ids: string[], ctx: HistoryContext): Promise<Map<string, SchedJob>>;
  /** The user's queued or running jobs by job name -> job id (array id for arrays), to adopt a submission made before a crash. */
  liveByName(ctx: HistoryContext): Promise<Map<string, string>>;
  /** The cancel command(s) for these ids (one, or one per job for schedulers that address array elements by range). */
  cancel(ids: string[]): CommandSpec | CommandSpec[];
  /** A command that validates a script without queueing it, or undefined when the scheduler has none. */
  preflight?(script: string, cwd: string, array?: ArrayRequest): CommandSpec;
  /** What preflight can and cannot check on this scheduler (shown in reports). */
  readonly preflightNote: string;
}

export interface ClusterBackendOptions {
  /** A campaign's own template folder (backend.template_dir). */
  templatesDir?: string;
  /** backend.max_array_size (default 1000). */
  maxArraySize?: number;
  /** backend.array_throttle: at most this many elements of one array run at once. */
  arrayThrottle?: number;
  /** backend.poll_interval in seconds (default 30): the least time between two status queries. */
  pollIntervalS?: number;
  /** backend.submit_retries (default 3). */
  submitRetries?: number;
  /** backend.submit_timeout in seconds (default 120). */
  submitTimeoutS?: number;
  /** The scheduler user whose jobs are listed (default: this process's user). */
  user?: string;
  /** Seconds to wait for a finished job's exit.json to appear (default 60). */
  exitGraceS?: number;
  /** Longest id list put on one status command; more ids query all of the user's jobs instead (default 500). */
  maxIdsPerQuery?: number;
  /** Look for a live job of the same name before submitting (default true). */
  adopt?: boolean;
  /** Test hooks. */
  runner?: CommandRunner;
  sleep?: (ms: number) => Promise<void>;
  now?: () => number;
  backoffBaseMs?: number;
}

interface View {
  jobs: Map<string, SchedJob>;
  error?: string;
}

const MAX_INTERVAL_MS = 10 * 60_000;

/** Throw SchedulerCommandError when a command could not run or timed out (its exit code is left to the caller). */
export function throwIfUnrunnable(spec: CommandSpec, o: CommandOutcome): void {
  if (o.spawnError !== undefined || o.timedOut) {
    const c = classifyCommandFailure(o);
    throw new SchedulerCommandError(spec, o, c.kind, c.reason);
  }
}

/** Run a command once; a non-zero exit, time-out or spawn failure throws SchedulerCommandError. */
export async function runChecked(ctx: HistoryContext, spec: CommandSpec): Promise<CommandOutcome> {
  const o = await ctx.cli.run(spec);
  if (o.exitCode !== 0 || o.timedOut || o.spawnError !== undefined) {
    const c = classifyCommandFailure(o);
    throw new SchedulerCommandError(spec, o, c.kind, c.reason);
  }
  return o;
}

export class ClusterBackend implements Backend {
  readonly name: string;
  readonly cli: SchedulerCli;
  readonly templates: ScriptTemplates;
  readonly maxArraySize: number;
  readonly throttle?: number;
  readonly user: string;
  private readonly pollMs: number;
  private readonly graceMs: number;
  private readonly maxIds: number;
  private readonly adopt: boolean;
  private readonly now: () => number;
  /** Recorded job id -> task folder (for poll/cancel calls that carry no dir). */
  private readonly dirs = new Map<string, string>();
  private readonly cancelled = new Set<string>();
  /** The last state seen for each job asked about (to tell a job cancelled while it waited from a lost one). */
  private readonly lastSeen = new Map<string, TaskState>();
  /** When a job was first found missing from both the queue and the history (for the grace before `lost`). */
  private readonly missingSince = new Map<string, number>();
  private cache?: { at: number; ids: Set<string>; jobs: Map<string, SchedJob> };
  private intervalMs: number;
  private failures = 0;

  constructor(
    readonly dialect: Dialect,
    o: ClusterBackendOptions = {},
  ) {
    this.name = dialect.name;
    const positiveInt = (v: number | undefined, what: string) => {
      if (v !== undefined && (!Number.isInteger(v) || v < 1)) throw new BackendOptionError(`${what}: expected a whole number of at least 1, found ${v}`);
      return v;
    };
    this.maxArraySize = positiveInt(o.maxArraySize, 'backend.max_array_size') ?? 1000;
    this.throttle = positiveInt(o.arrayThrottle, 'backend.array_throttle');
    this.pollMs = Math.max(0, (o.pollIntervalS ?? 30) * 1000);
    this.intervalMs = this.pollMs;
    this.graceMs = Math.max(0, (o.exitGraceS ?? 60) * 1000);
    this.maxIds = o.maxIdsPerQuery ?? 500;
    this.adopt = o.adopt ?? true;
    this.now = o.now ?? Date.now;
    this.user = o.user ?? userInfo().username;
    this.templates = loadTemplates(dialect.name, o.templatesDir);
    this.cli = new SchedulerCli({ runner: o.runner, timeoutS: o.submitTimeoutS, retries: o.submitRetries, sleep: o.sleep, backoffBaseMs: o.backoffBaseMs });
  }

  /** The batch script: the scheduler's header with the task's directives, then the common body. */
  render(task: TaskSpec): string {
    let directives: string[];
    try {
      directives = this.dialect.directives(task.resources, singleJobName(task));
    } catch (err) {
      if (err instanceof DirectiveError) throw new RenderError(task.id, err.field, err.message.slice(err.field.length + 2));
      throw err;
    }
    return renderScript(task, directives, this.templates);
  }

  /** How the given tasks would be submitted (for dry runs, preflight and tests). */
  plan(tasks: TaskSpec[]): SubmissionUnit[] {
    return planUnits(tasks, { maxArraySize: this.maxArraySize });
  }

  /**
   * Submit the tasks (their run.sh must be written): one scheduler call per single job or array.
   * onSubmitted is awaited for each task, in order, as soon as its job id is known and before the next
   * submission. A unit whose job name is already queued or running (submitted by a run that crashed
   * before it could record the id) is adopted instead of submitted again.
   */
  async submit(tasks: TaskSpec[], onSubmitted: (s: Submission) => Promise<void> | void): Promise<void> {
    const seen = new Set<string>();
    for (const t of tasks) {
      if (seen.has(t.id)) throw new Error(`task ${t.id} appears twice in one submit`);
      seen.add(t.id);
      if (!existsSync(join(t.dir, SCRIPT_FILE))) throw new Error(`task ${t.id}: ${join(t.dir, SCRIPT_FILE)} does not exist (write the task files before submitting)`);
    }
    if (tasks.length === 0) return;
    const ctx = { cli: this.cli, user: this.user };
    let live = new Map<string, string>();
    if (this.adopt) {
      try {
        live = await this.dialect.liveByName(ctx);
      } catch (err) {
        if (err instanceof SchedulerCommandError && err.kind === 'permanent' && err.outcome.spawnError !== undefined) throw err;
        // A scheduler that cannot list jobs now will not take submissions either; the submit below says so.
      }
    }
    // A live array of the same stage folder whose manifest names tasks being submitted now: a run that
    // crashed after the array was submitted but before all its element ids were recorded. Those tasks
    // are adopted element by element (their set differs from the array's, so its name does not match).
    const elements = this.adopt ? liveArrayElements(tasks, live, (id, k) => this.dialect.elementId(id, k)) : new Map<string, string>();
    if (elements.size > 0) {
      // Only elements the scheduler still holds (an element of an earlier attempt that has ended is
      // not adopted). When the scheduler cannot say, adopt: a job that turns out gone is found lost
      // by the next poll and run again, never twice at once.
      const v = await this.view([...new Set(elements.values())]);
      if (v.error === undefined) {
        for (const [dir, id] of elements) {
          const job = v.jobs.get(id);
          if (!job || this.dialect.map(job).final) elements.delete(dir);
        }
      }
    }
    const fresh: TaskSpec[] = [];
    for (const t of tasks) {
      const id = elements.get(t.dir);
      if (id === undefined) {
        fresh.push(t);
        continue;
      }
      this.dirs.set(id, t.dir);
      await onSubmitted({ id: t.id, job_id: id, dir: t.dir, adopted: true });
    }
    for (const unit of this.plan(fresh)) {
      let jobId = live.get(unit.name);
      const adopted = jobId !== undefined;
      if (jobId === undefined) {
        let spec: CommandSpec;
        if (unit.kind === 'array') {
          const files = writeArrayFiles(this.dialect.name, unit, this.templates, this.throttle);
          spec = this.dialect.submit(files.script, files.dir);
        } else {
          const t = unit.tasks[0];
          spec = this.dialect.submit(join(t.dir, SCRIPT_FILE), t.dir);
        }
        jobId = await this.cli.runWithRetries(
          spec,
          (o) => {
            if (o.exitCode !== 0) return undefined;
            const id = this.dialect.parseSubmitId(o.stdout);
            if (id === undefined) throw new SchedulerCommandError(spec, o, 'permanent', `submitted, but no job id could be read from its output: ${JSON.stringify(o.stdout.slice(0, 200))}`);
            return id;
          },
          async () => {
            try {
              return (await this.dialect.liveByName(ctx)).get(unit.name);
            } catch {
              return undefined;
            }
          },
        );
      }
      for (let k = 0; k < unit.tasks.length; k++) {
        const t = unit.tasks[k];
        const id = unit.kind === 'array' ? this.dialect.elementId(jobId, k + 1) : jobId;
        this.dirs.set(id, t.dir);
        await onSubmitted({ id: t.id, job_id: id, dir: t.dir, ...(adopted ? { adopted: true } : {}) });
      }
    }
  }

  /** Milliseconds the caller should wait before the next poll (the poll interval, longer after errors or while nothing changes). */
  nextPollDelayMs(): number {
    return this.intervalMs;
  }

  /** Scheduler calls made so far (all commands). */
  get schedulerCalls(): number {
    return this.cli.total;
  }

  async poll(submissions: Submission[]): Promise<TaskStatus[]> {
    const out: TaskStatus[] = new Array(submissions.length);
    const ask: { i: number; s: Submission; dir: string; rec?: ExitRecord }[] = [];
    submissions.forEach((s, i) => {
      const dir = s.dir ?? this.dirs.get(s.job_id);
      if (dir === undefined) throw new Error(`poll ${s.id} (job ${s.job_id}): the submission carries no task folder (dir) and was not made by this process`);
      const rec = readExitRecordSync(dir);
      if (rec && rec.exit_code === 0) out[i] = { id: s.id, job_id: s.job_id, state: 'succeeded', exit: rec };
      else ask.push({ i, s, dir, rec });
    });
    if (ask.length === 0) return out;
    const view = await this.view(ask.map((a) => a.s.job_id));
    const vanished: typeof ask = [];
    for (const a of ask) {
      const job = view.jobs.get(a.s.job_id);
      if (job) out[a.i] = await this.status(a.s, a.dir, a.rec, job);
      else if (view.error !== undefined) out[a.i] = this.unknown(a.s, a.rec, view.error);
      else vanished.push(a);
    }
    if (vanished.length > 0) {
      let past = new Map<string, SchedJob>();
      if (this.dialect.history) {
        try {
          past = await this.dialect.history(vanished.map((a) => a.s.job_id), { cli: this.cli, user: this.user });
        } catch {
          past = new Map();
        }
      }
      for (const a of vanished) {
        const job = past.get(a.s.job_id);
        out[a.i] = job ? await this.status(a.s, a.dir, a.rec, job) : await this.gone(a.s, a.dir, a.rec);
      }
    }
    return out;
  }

  /** The scheduler could not be asked: keep what was last known, say why. */
  private unknown(s: Submission, rec: ExitRecord | undefined, error: string): TaskStatus {
    const last = this.cache?.jobs.get(s.job_id);
    const m = last ? this.dialect.map(last) : undefined;
    const state: TaskState = m && !m.final ? m.state : 'queued';
    return { id: s.id, job_id: s.job_id, state: rec ? 'running' : state, reason: `the scheduler is not answering (${error}); trying again`, ...(rec ? { exit: rec } : {}) };
  }

  private async status(s: Submission, dir: string, rec: ExitRecord | undefined, job: SchedJob): Promise<TaskStatus> {
    const base = { id: s.id, job_id: s.job_id };
    const m = this.dialect.map(job);
    if (rec) {
      if (!m.final) {
        if (this.now() - Date.parse(rec.end) > this.graceMs + this.pollMs) return this.byExitCode(s, dir, rec, `the scheduler still shows it ${job.state}`);
        return { ...base, state: 'running', exit: rec, reason: `exit record written (${describeExitCode(rec.exit_code)}); waiting for the scheduler's final state` };
      }
      if (m.state === 'succeeded' || m.state === 'failed') return this.byExitCode(s, dir, rec);
      return { ...base, state: m.state, exit: rec, reason: `${m.reason ?? m.state} (${describeExitCode(rec.exit_code)})`, ...this.outside(s, m) };
    }
    if (!m.final) return { ...base, state: m.state, ...(m.reason ? { reason: m.reason } : {}) };
    if (m.state === 'succeeded' || m.state === 'failed') {
      if (job.end === undefined || this.now() - job.end < this.graceMs) {
        return { ...base, state: 'running', reason: `the scheduler says ${job.state}; waiting for exit.json to appear` };
      }
      if (m.state === 'succeeded') {
        return { ...base, state: 'lost', reason: `the scheduler says ${job.state} but the task wrote no exit record (see the scheduler's output file in ${dir})` };
      }
      const tail = await tailLines(join(dir, STDERR_FILE), 20);
      return { ...base, state: 'failed', reason: `${m.reason ?? job.state}; no exit record: the batch script may not have started (see the scheduler's output file in ${dir})${tail ? `; last lines of stderr.log:\n${tail}` : ''}` };
    }
    return { ...base, state: m.state, ...(m.reason ? { reason: m.reason } : {}), ...this.outside(s, m) };
  }

  /**
   * A cancel this process did not make: a person's scancel/qdel/bkill (ratchet's own cancels, by this
   * process, are remembered; those of `ratchet stop` are held before they are seen).
   */
  private outside(s: Submission, m: Mapped): { outside?: true } {
    return m.state === 'cancelled' && !this.cancelled.has(s.job_id) ? { outside: true } : {};
  }

  private async byExitCode(s: Submission, dir: string, rec: ExitRecord, note?: string): Promise<TaskStatus> {
    // A job this process cancelled may still have run its EXIT trap (qdel/scancel send SIGTERM first,
    // recorded as 143): that is the cancel, not a failure of the command.
    if (this.cancelled.has(s.job_id) && rec.exit_code !== 0)
      return { id: s.id, job_id: s.job_id, state: 'cancelled', exit: rec, reason: `cancelled by ratchet (${describeExitCode(rec.exit_code)})` };
    const tail = await tailLines(join(dir, STDERR_FILE), 20);
    return {
      id: s.id,
      job_id: s.job_id,
      state: 'failed',
      exit: rec,
      reason: `${describeExitCode(rec.exit_code)}${note ? ` (${note})` : ''}${tail ? `; last lines of stderr.log:\n${tail}` : ''}`,
    };
  }

  /** A job neither the queue nor the history knows. */
  private async gone(s: Submission, dir: string, rec: ExitRecord | undefined): Promise<TaskStatus> {
    if (rec) return this.byExitCode(s, dir, rec, 'the scheduler no longer knows the job');
    if (this.cancelled.has(s.job_id)) return { id: s.id, job_id: s.job_id, state: 'cancelled', reason: 'cancelled by ratchet before it wrote an exit record' };
    const last = this.lastSeen.get(s.job_id);
    const waited = last !== undefined ? last === 'queued' : s.neverStarted === true;
    // The exit record (shared file system) or the accounting record (Grid Engine flushes it after the
    // job leaves the queue) may show up late: wait the grace before calling the job lost.
    const now = this.now();
    const since = this.missingSince.get(s.job_id) ?? now;
    this.missingSince.set(s.job_id, since);
    if (now - since < this.graceMs) {
      // A job never seen running stays 'queued' meanwhile (reporting it running would record a start).
      return { id: s.id, job_id: s.job_id, state: waited ? 'queued' : 'running', reason: `the scheduler no longer lists job ${s.job_id}; waiting for its exit record or accounting record` };
    }
    if (waited) {
      return {
        id: s.id,
        job_id: s.job_id,
        state: 'cancelled',
        outside: true,
        reason: `job ${s.job_id} left the queue before it started and the scheduler keeps no record of it (a cancel while it waited)`,
      };
    }
    return { id: s.id, job_id: s.job_id, state: 'lost', reason: `the scheduler does not know job ${s.job_id} and the task wrote no exit record` };
  }

  /** The scheduler's jobs for these ids: one status command, or the cached answer within the poll interval. */
  private async view(ids: string[]): Promise<View> {
    const now = this.now();
    const c = this.cache;
    if (c && now - c.at < this.intervalMs && ids.every((id) => c.ids.has(id))) return { jobs: c.jobs };
    const queryIds = [...new Set(ids.map((id) => this.dialect.queryIdOf(id)))];
    const spec = queryIds.length > this.maxIds ? this.dialect.query(undefined, this.user) : this.dialect.query(queryIds, this.user);
    const o = await this.cli.run(spec);
    const parsed = o.spawnError === undefined && !o.timedOut ? this.dialect.parseQuery(o) : undefined;
    if (parsed === undefined) {
      const c2 = classifyCommandFailure(o);
      if (c2.kind === 'permanent') throw new SchedulerCommandError(spec, o, 'permanent', c2.reason);
      this.failures++;
      this.intervalMs = Math.min(MAX_INTERVAL_MS, Math.max(this.pollMs, 1000) * 2 ** this.failures);
      return { jobs: new Map(), error: c2.reason };
    }
    const jobs = new Map<string, SchedJob>();
    for (const j of parsed) jobs.set(j.id, j);
    for (const id of ids) {
      const j = jobs.get(id);
      if (j) this.lastSeen.set(id, this.dialect.map(j).state);
    }
    let changed = !c;
    if (c) {
      for (const id of ids) {
        if (c.jobs.get(id)?.state !== jobs.get(id)?.state) {
          changed = true;
          break;
        }
      }
    }
    this.failures = 0;
    // Back off while nothing changes (up to 4x the poll interval); back to the interval on any change.
    this.intervalMs = changed ? this.pollMs : Math.min(this.pollMs * 4, Math.round(this.intervalMs * 1.5));
    this.cache = { at: this.now(), ids: new Set(ids), jobs };
    return { jobs };
  }

  /** Cancel the given submissions (one scheduler call per up to maxIdsPerQuery ids). */
  async cancel(submissions: Submission[]): Promise<void> {
    const ids = [...new Set(submissions.map((s) => s.job_id))];
    for (let i = 0; i < ids.length; i += this.maxIds) {
      const chunk = ids.slice(i, i + this.maxIds);
      const specs = this.dialect.cancel(chunk);
      for (const spec of Array.isArray(specs) ? specs : [specs]) {
        // A job that already ended cannot be cancelled: that error is not a failure of cancel.
        await this.cli.runWithRetries(spec, (o) => (o.exitCode === 0 || classifyCommandFailure(o).kind === 'permanent' ? true : undefined));
      }
      for (const id of chunk) this.cancelled.add(id);
    }
    this.cache = undefined;
  }

  // No drain(): the engine reads its absence as "tasks run elsewhere; poll, or return and come back".
}

/**
 * Task folder -> element id for every task named in the manifest of a live array (by its job name
 * ending ".a<key>", with the manifest <stage folder>/.arrays/<key>.tasks written when it was submitted).
 */
export function liveArrayElements(tasks: TaskSpec[], live: Map<string, string>, elementId: (arrayId: string, index: number) => string): Map<string, string> {
  const out = new Map<string, string>();
  if (live.size === 0) return out;
  for (const base of new Set(tasks.map((t) => dirname(t.dir)))) {
    for (const [name, id] of live) {
      const m = /\.a([0-9a-f]+)$/.exec(name);
      if (!m) continue;
      let text: string;
      try {
        text = readFileSync(join(base, ARRAYS_DIR, `${m[1]}.tasks`), 'utf8');
      } catch {
        continue;
      }
      text
        .split('\n')
        .filter((l) => l !== '')
        .forEach((folder, k) => out.set(join(base, folder), elementId(id, k + 1)));
    }
  }
  return out;
}
