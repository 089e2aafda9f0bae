/**
 * The `local` backend: runs each task's run.sh with bash on this machine, `jobs` at a time.
 *
 * - Every task runs in its own process group (a detached child), so stopping it stops its whole tree.
 *   The child first writes "<pid> <host>" to <task dir>/local.pid, then execs `bash run.sh`; a later
 *   ratchet process (after a crash) can tell from that file whether the task is still running.
 * - Job ids are a counter prefixed with this ratchet process's pid: "<ratchet pid>.<n>", known before
 *   the task starts, so the caller records the id before anything runs.
 * - The exit record (exit.json) is the authority on how a task ended; a task that has one is never
 *   started again (here, and by the script's own guard).
 * - The walltime of the task's resources is enforced: SIGTERM to the group at the limit, SIGKILL after
 *   the grace period, state 'walltime'.
 *
 * node:child_process rather than execa: we want no output capture (the script writes its own logs),
 * a detached process group that we signal by negative pid, and plain exit/signal events; execa's
 * promise (rejecting on non-zero exit) and its clean-up-on-exit logic would have to be switched off.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, readFileSync, readlinkSync, realpathSync } from 'node:fs';
import { availableParallelism, constants as osConstants, hostname } from 'node:os';
import { join } from 'node:path';
import PQueue from 'p-queue';
import type { Backend, ExitRecord, Submission, TaskSpec, TaskState, TaskStatus } from './backend.js';
import { EXIT_RECORD_FILE, readExitRecordSync, STDERR_FILE, tailLines } from './exit-record.js';
import { renderScript } from './render.js';
import { LOCAL_PID_FILE, SCRIPT_FILE } from './task-files.js';
import { loadTemplates, type ScriptTemplates } from './templates.js';

export interface LocalBackendOptions {
  /** Tasks running at once (default: the number of cores, os.availableParallelism()). */
  jobs?: number;
  /** A campaign's own template folder (files there replace the built-in local.sh / common.sh). */
  templatesDir?: string;
  /** After SIGTERM (cancel, stopAll, walltime), SIGKILL the group if it is still alive after this long. Default 10 s. */
  killGraceMs?: number;
  /** Stop tasks that exceed resources.walltime_s (default true). */
  enforceWalltime?: boolean;
}

/** A bad backend option (e.g. --jobs 0): exit code 2. */
export class BackendOptionError extends Error {
  readonly exitCode = 2;
  constructor(message: string) {
    super(message);
    this.name = 'BackendOptionError';
  }
}

type Phase = 'queued' | 'running' | 'ended';

interface LocalJob {
  sub: Submission & { dir: string };
  task: TaskSpec;
  phase: Phase;
  child?: ChildProcess;
  pid?: number;
  cancelled: boolean;
  walltimeHit: boolean;
  exitCode: number | null;
  signal: NodeJS.Signals | null;
  /** The process has exited (its 'close' may still be pending). */
  exited: boolean;
  spawnError?: string;
  /** What the script wrote to its own stderr before redirecting it to stderr.log (last 2 KB). */
  early: string;
  timers: NodeJS.Timeout[];
  done: Promise<void>;
  finish: () => void;
}

/** Runs "<pid> <host>" into local.pid, then becomes `bash run.sh` (same pid, same process group). */
const WRAPPER = `printf '%s %s\\n' "$$" "\${HOSTNAME:-}" >.${LOCAL_PID_FILE}.tmp && mv -f .${LOCAL_PID_FILE}.tmp ${LOCAL_PID_FILE} && exec bash ./${SCRIPT_FILE}`;

const SIGNAL_NAMES = new Map<number, string>(Object.entries(osConstants.signals).map(([name, n]) => [n, name]));

export class LocalBackend implements Backend {
  readonly name = 'local';
  readonly jobs: number;
  private readonly templates: ScriptTemplates;
  private readonly killGraceMs: number;
  private readonly enforceWalltime: boolean;
  private readonly queue: PQueue;
  private readonly byJobId = new Map<string, LocalJob>();
  /** Active (queued or running) jobs by task id, to refuse a second submission of the same task. */
  private readonly active = new Map<string, LocalJob>();
  private counter = 0;

  constructor(options: LocalBackendOptions = {}) {
    const jobs = options.jobs ?? availableParallelism();
    if (!Number.isInteger(jobs) || jobs < 1) {
      throw new BackendOptionError(`--jobs: expected a whole number of at least 1, found ${String(options.jobs)}`);
    }
    const grace = options.killGraceMs ?? 10_000;
    if (!Number.isFinite(grace) || grace < 0) throw new BackendOptionError(`killGraceMs: expected a number of milliseconds >= 0, found ${grace}`);
    this.jobs = jobs;
    this.killGraceMs = grace;
    this.enforceWalltime = options.enforceWalltime ?? true;
    this.templates = loadTemplates('local', options.templatesDir);
    this.queue = new PQueue({ concurrency: jobs });
  }

  render(task: TaskSpec): string {
    return renderScript(task, [], this.templates);
  }

  /**
   * Queue the tasks. For each, in order: its job id is made, onSubmitted is awaited, then the task is
   * queued (it starts when one of the `jobs` slots is free). Resolves when all are queued, not run:
   * use poll() and drain(). Refuses, before anything is queued, a task without run.sh, a task already
   * queued or running here, and a task still running under an earlier ratchet process.
   */
  async submit(tasks: TaskSpec[], onSubmitted: (s: Submission) => Promise<void> | void): Promise<void> {
    const seen = new Set<string>();
    for (const task of tasks) {
      if (seen.has(task.id)) throw new Error(`task ${task.id} appears twice in one submit`);
      seen.add(task.id);
      if (!existsSync(join(task.dir, SCRIPT_FILE))) throw new Error(`task ${task.id}: ${join(task.dir, SCRIPT_FILE)} does not exist (write the task files before submitting)`);
      const mine = this.active.get(task.id);
      if (mine) throw new Error(`task ${task.id} is already ${mine.phase} here as job ${mine.sub.job_id}`);
      const other = livePid(task.dir);
      if (other !== undefined) throw new Error(`task ${task.id} is still running as pid ${other.pid} (started by an earlier ratchet run on ${other.host}); wait for it or cancel it`);
    }
    for (const task of tasks) {
      const sub = { id: task.id, job_id: `${process.pid}.${++this.counter}`, dir: task.dir };
      await onSubmitted({ ...sub });
      let finish!: () => void;
      const done = new Promise<void>((resolve) => (finish = resolve));
      const job: LocalJob = { sub, task, phase: 'queued', cancelled: false, walltimeHit: false, exitCode: null, signal: null, exited: false, early: '', timers: [], done, finish };
      this.byJobId.set(sub.job_id, job);
      this.active.set(task.id, job);
      void this.queue.add(() => this.run(job));
    }
  }

  /** Start one task and resolve when its process has ended (or at once when it must not run). */
  private run(job: LocalJob): Promise<void> {
    const end = () => {
      if (job.phase === 'ended') return;
      for (const t of job.timers) clearTimeout(t);
      job.timers = [];
      job.child?.stderr?.destroy();
      // Like a cluster at the end of a job: whatever the task left running in its group is stopped.
      if (job.pid !== undefined) killGroup(job.pid, 'SIGKILL');
      job.phase = 'ended';
      this.active.delete(job.task.id);
      job.finish();
    };
    if (job.cancelled || existsSync(join(job.task.dir, EXIT_RECORD_FILE))) {
      end();
      return job.done;
    }
    let child: ChildProcess;
    try {
      child = spawn('bash', ['-c', WRAPPER], { cwd: job.task.dir, detached: true, stdio: ['ignore', 'ignore', 'pipe'] });
    } catch (err) {
      job.spawnError = err instanceof Error ? err.message : String(err);
      end();
      return job.done;
    }
    job.child = child;
    job.pid = child.pid;
    job.phase = 'running';
    child.stderr?.setEncoding('utf8');
    child.stderr?.on('data', (s: string) => {
      job.early = (job.early + s).slice(-2048);
    });
    child.on('error', (err) => {
      job.spawnError = err.message;
      end();
    });
    child.on('exit', (code, signal) => {
      job.exitCode = code;
      job.signal = signal;
      job.exited = true;
      // 'close' follows once the stderr pipe is drained; don't wait on it for long.
      job.timers.push(setTimeout(end, 500));
    });
    child.on('close', end);
    const w = job.task.resources.walltime_s;
    if (this.enforceWalltime && Number.isFinite(w) && w > 0 && w * 1000 < 2 ** 31) {
      job.timers.push(
        setTimeout(() => {
          if (job.exited) return;
          job.walltimeHit = true;
          this.stopJob(job, 'SIGTERM');
        }, w * 1000),
      );
    }
    return job.done;
  }

  /** Signal a running job's process group, and SIGKILL it after the grace period. */
  private stopJob(job: LocalJob, signal: NodeJS.Signals): void {
    if (job.phase !== 'running' || job.exited || job.pid === undefined) return;
    killGroup(job.pid, signal);
    if (signal !== 'SIGKILL') {
      const pid = job.pid;
      const t = setTimeout(() => {
        if (!job.exited) killGroup(pid, 'SIGKILL');
      }, this.killGraceMs);
      job.timers.push(t);
    }
  }

  async poll(submissions: Submission[]): Promise<TaskStatus[]> {
    return Promise.all(submissions.map((s) => this.pollOne(s)));
  }

  private async pollOne(s: Submission): Promise<TaskStatus> {
    const job = this.byJobId.get(s.job_id);
    const dir = s.dir ?? job?.sub.dir;
    if (dir === undefined) throw new Error(`poll ${s.id} (job ${s.job_id}): the submission was made by another process and carries no dir`);
    const base = { id: s.id, job_id: s.job_id };
    const record = readExitRecordSync(dir);
    if (record) return { ...base, exit: record, ...(await classifyExit(record, dir, job)) };
    if (job) {
      if (job.phase === 'queued') return job.cancelled ? { ...base, state: 'cancelled', reason: 'cancelled before it started' } : { ...base, state: 'queued' };
      if (job.phase === 'running') return { ...base, state: 'running' };
      if (job.walltimeHit) return { ...base, state: 'walltime', reason: `exceeded walltime ${hms(job.task.resources.walltime_s)} and was killed before it wrote exit.json` };
      if (job.cancelled) return { ...base, state: 'cancelled', reason: job.pid === undefined ? 'cancelled before it started' : 'cancelled; killed before it wrote exit.json' };
      return { ...base, state: 'lost', reason: lostReason(job) };
    }
    const other = livePid(dir);
    if (other !== undefined) {
      return other.checkable
        ? { ...base, state: 'running' }
        : { ...base, state: 'running', reason: `started on host ${other.host} (pid ${other.pid}); it cannot be checked from ${hostname()}` };
    }
    return { ...base, state: 'lost', reason: 'no exit record and no live process: it never started, or it was killed before it could write exit.json' };
  }

  /**
   * Stop the given submissions: queued ones never start; running ones get SIGTERM on their process
   * group (the script records exit 143), then SIGKILL after the grace period. Resolves when they ended.
   * Submissions of an earlier process are stopped through their local.pid.
   */
  async cancel(submissions: Submission[]): Promise<void> {
    const waits: Promise<void>[] = [];
    for (const s of submissions) {
      const job = this.byJobId.get(s.job_id);
      if (job) {
        if (job.phase === 'ended') continue;
        job.cancelled = true;
        this.stopJob(job, 'SIGTERM');
        waits.push(job.done);
      } else if (s.dir !== undefined) {
        const other = livePid(s.dir);
        if (other?.checkable) waits.push(this.stopForeign(other.pid, s.dir));
      }
    }
    await Promise.all(waits);
  }

  private async stopForeign(pid: number, dir: string): Promise<void> {
    killGroup(pid, 'SIGTERM');
    const deadline = Date.now() + this.killGraceMs;
    let killed = false;
    while (livePid(dir)?.pid === pid) {
      if (!killed && Date.now() >= deadline) {
        killGroup(pid, 'SIGKILL');
        killed = true;
      } else if (killed && Date.now() >= deadline + 5_000) {
        break;
      }
      await new Promise((r) => setTimeout(r, 50));
    }
  }

  /**
   * Stop everything this backend started or queued (for the CLI's SIGINT/SIGTERM handler): queued
   * tasks never start, running ones get `signal` on their process group and SIGKILL after the grace
   * period. Resolves when every one has ended.
   */
  async stopAll(signal: NodeJS.Signals = 'SIGTERM'): Promise<void> {
    for (const job of this.active.values()) {
      job.cancelled = true;
      this.stopJob(job, signal);
    }
    await this.queue.onIdle();
  }

  /** Resolves when every task submitted here has ended. */
  async drain(): Promise<void> {
    await this.queue.onIdle();
  }

  /** Tasks queued or running here now (for progress display). */
  get counts(): { queued: number; running: number } {
    let queued = 0;
    let running = 0;
    for (const j of this.active.values()) j.phase === 'running' ? running++ : queued++;
    return { queued, running };
  }
}

/** State and plain-words reason from an exit record (and what this process knows about the job). */
async function classifyExit(r: ExitRecord, dir: string, job: LocalJob | undefined): Promise<{ state: TaskState; reason?: string; outside?: boolean }> {
  const code = r.exit_code;
  if (code === 0) return { state: 'succeeded' };
  if (job?.walltimeHit) return { state: 'walltime', reason: `exceeded walltime ${hms(job.task.resources.walltime_s)} (exit ${code})` };
  if (job?.cancelled) return { state: 'cancelled', reason: `cancelled (exit ${code})` };
  if (code === 143 || code === 130 || code === 129) {
    // Not a cancel of this process: someone signalled the task (ratchet stop, or a person's kill).
    return { state: 'cancelled', reason: `stopped by ${SIGNAL_NAMES.get(code - 128)} (exit ${code}) before it finished`, outside: true };
  }
  let what = `exit code ${code}`;
  if (code === 127) what += ' (command not found)';
  else if (code === 126) what += ' (command found but not executable)';
  else if (code === 137) what = 'killed by SIGKILL (exit 137), often the kernel\'s out-of-memory killer';
  else if (code > 128 && SIGNAL_NAMES.has(code - 128)) what += ` (killed by ${SIGNAL_NAMES.get(code - 128)})`;
  const tail = await tailLines(join(dir, STDERR_FILE), 20);
  return { state: 'failed', reason: tail ? `${what}; last lines of stderr.log:\n${tail}` : what };
}

function lostReason(job: LocalJob): string {
  let how: string;
  if (job.spawnError !== undefined) how = `could not be started: ${job.spawnError}`;
  else if (job.signal) how = `the batch script was killed by ${job.signal}`;
  else how = `the batch script ended with code ${job.exitCode}`;
  const early = job.early.trim();
  return `no exit record: ${how} before writing exit.json${early ? `; it said: ${early}` : ''}`;
}

/** HH:MM:SS for a number of seconds. */
export function hms(seconds: number): string {
  const s = Math.round(seconds);
  const pad = (n: number) => String(n).padStart(2, '0');
  return `${pad(Math.floor(s / 3600))}:${pad(Math.floor((s % 3600) / 60))}:${pad(s % 60)}`;
}

function killGroup(pid: number, signal: NodeJS.Signals): void {
  try {
    process.kill(-pid, signal);
  } catch {
    // ESRCH: already gone.
  }
}

const HAS_PROC = existsSync('/proc/self/cwd');

/**
 * The process recorded in <dir>/local.pid, when it is alive and still running in that directory.
 * On Linux the check reads /proc/<pid>/cwd (so a recycled pid does not count); elsewhere it only asks
 * whether the pid exists. A pid from another host cannot be checked and is reported with checkable=false.
 */
export function livePid(dir: string): { pid: number; host: string; checkable: boolean } | undefined {
  let text: string;
  try {
    text = readFileSync(join(dir, LOCAL_PID_FILE), 'utf8');
  } catch {
    return undefined;
  }
  const [pidText, host = ''] = text.trim().split(/\s+/);
  const pid = Number(pidText);
  if (!Number.isInteger(pid) || pid <= 1) return undefined;
  if (host !== '' && host !== hostname()) return { pid, host, checkable: false };
  if (HAS_PROC) {
    try {
      return readlinkSync(`/proc/${pid}/cwd`) === realpathSync(dir) ? { pid, host, checkable: true } : undefined;
    } catch {
      return undefined;
    }
  }
  try {
    process.kill(pid, 0);
    return { pid, host, checkable: true };
  } catch (err) {
    return (err as NodeJS.ErrnoException).code === 'EPERM' ? { pid, host, checkable: true } : undefined;
  }
}
