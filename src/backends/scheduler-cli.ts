/**
 * Running scheduler commands (sbatch, squeue, qsub, bjobs, ...): one place that spawns them with a time
 * limit, counts the calls (for the "one call per poll cycle" promise and its benchmark), and retries
 * transient failures with back-off.
 *
 * execa: promise API with a timeout that kills the child, stdin from a string or a file, no shell in
 * between (arguments are passed as they are, so no value is ever re-parsed by a shell).
 */
import { execa } from 'execa';
import { backoffMs, classifyCommandFailure, type CommandOutcome } from './classify.js';

export interface CommandSpec {
  cmd: string;
  args: string[];
  /** Working directory (the submit directory: schedulers write default output files there). */
  cwd?: string;
  /** Feed this file to stdin (LSF's `bsub < script`). */
  stdinFile?: string;
}

/** Runs one command; the default spawns it, tests inject a fake. */
export type CommandRunner = (spec: CommandSpec, timeoutMs: number) => Promise<CommandOutcome>;

export const spawnRunner: CommandRunner = async (spec, timeoutMs) => {
  try {
    const r = await execa(spec.cmd, spec.args, {
      cwd: spec.cwd,
      reject: false,
      timeout: timeoutMs,
      stdin: spec.stdinFile !== undefined ? { file: spec.stdinFile } : 'ignore',
      stripFinalNewline: false,
      env: { LC_ALL: 'C' },
      forceKillAfterDelay: 2000,
    });
    const spawnFailed = r.exitCode === undefined && !r.timedOut;
    return {
      exitCode: r.exitCode ?? null,
      stdout: String(r.stdout ?? ''),
      stderr: String(r.stderr ?? ''),
      timedOut: r.timedOut === true,
      ...(spawnFailed ? { spawnError: `cannot run ${spec.cmd}: ${r.originalMessage ?? r.shortMessage ?? 'not found'} (is it installed and on PATH?)` } : {}),
    };
  } catch (err) {
    return { exitCode: null, stdout: '', stderr: '', timedOut: false, spawnError: `cannot run ${spec.cmd}: ${(err as Error).message}` };
  }
};

/** A scheduler command that failed for good (or kept failing transiently past the retries). */
export class SchedulerCommandError extends Error {
  constructor(
    readonly spec: CommandSpec,
    readonly outcome: CommandOutcome,
    readonly kind: 'transient' | 'permanent',
    reason: string,
  ) {
    super(`${spec.cmd} ${abbreviate(spec.args)}: ${reason}`);
    this.name = 'SchedulerCommandError';
  }
}

function abbreviate(args: string[]): string {
  const s = args.join(' ');
  return s.length > 160 ? `${s.slice(0, 157)}...` : s;
}

export interface SchedulerCliOptions {
  runner?: CommandRunner;
  /** Seconds before a command is stopped and counted as a transient failure (backend.submit_timeout). */
  timeoutS?: number;
  /** Retries after a transient failure (backend.submit_retries). */
  retries?: number;
  /** First back-off in ms (doubles each retry, capped at 60 s). */
  backoffBaseMs?: number;
  sleep?: (ms: number) => Promise<void>;
}

export class SchedulerCli {
  /** Commands run so far, by command name (sbatch, squeue, ...). */
  readonly calls = new Map<string, number>();
  private readonly runner: CommandRunner;
  readonly timeoutMs: number;
  readonly retries: number;
  private readonly backoffBaseMs: number;
  private readonly sleep: (ms: number) => Promise<void>;

  constructor(o: SchedulerCliOptions = {}) {
    this.runner = o.runner ?? spawnRunner;
    this.timeoutMs = Math.round((o.timeoutS ?? 120) * 1000);
    this.retries = o.retries ?? 3;
    this.backoffBaseMs = o.backoffBaseMs ?? 2000;
    this.sleep = o.sleep ?? ((ms) => new Promise((r) => setTimeout(r, ms)));
  }

  /** Total commands run. */
  get total(): number {
    let n = 0;
    for (const v of this.calls.values()) n += v;
    return n;
  }

  /** Run once; never throws (the outcome says what happened). */
  async run(spec: CommandSpec): Promise<CommandOutcome> {
    this.calls.set(spec.cmd, (this.calls.get(spec.cmd) ?? 0) + 1);
    return this.runner(spec, this.timeoutMs);
  }

  /**
   * Run until it succeeds (exit 0, or `ok` says the output is acceptable), retrying transient failures
   * up to `retries` times with back-off. Before each retry `beforeRetry` may look for the effect of the
   * failed attempt (a submission that went through although the client timed out) and return a result
   * to use instead of running again. Throws SchedulerCommandError for a permanent failure or when the
   * retries are used up.
   */
  async runWithRetries<T>(
    spec: CommandSpec,
    accept: (o: CommandOutcome) => T | undefined,
    beforeRetry?: () => Promise<T | undefined>,
  ): Promise<T> {
    for (let attempt = 0; ; attempt++) {
      const o = await this.run(spec);
      if (o.spawnError === undefined && !o.timedOut) {
        const v = o.exitCode !== null ? accept(o) : undefined;
        if (v !== undefined) return v;
      }
      const c = classifyCommandFailure(o);
      if (c.kind === 'permanent') throw new SchedulerCommandError(spec, o, 'permanent', c.reason);
      if (attempt >= this.retries) throw new SchedulerCommandError(spec, o, 'transient', `${c.reason} (gave up after ${attempt + 1} tries)`);
      await this.sleep(backoffMs(attempt + 1, this.backoffBaseMs));
      if (beforeRetry) {
        const found = await beforeRetry();
        if (found !== undefined) return found;
      }
    }
  }
}
