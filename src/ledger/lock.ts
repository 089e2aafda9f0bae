/**
 * One writer at a time: `.ratchet/lock` in the campaign directory.
 *
 * The lock file is created atomically (open with O_CREAT|O_EXCL, Node flag 'wx') and holds one JSON
 * object: host, pid, start time, command. A lock left behind by a dead process on this host
 * (process.kill(pid, 0) fails with ESRCH) is taken over with a message; a live one, or one from
 * another host (whose process cannot be checked from here), is refused with a LockError.
 *
 * Stale takeover is serialised through a second file, `.ratchet/lock.takeover` (also created with 'wx'),
 * so two processes that both find the same stale lock cannot both take it.
 */
import { promises as fsp, readFileSync, unlinkSync } from 'node:fs';
import { hostname } from 'node:os';
import { join } from 'node:path';

export const RATCHET_DIR = '.ratchet';
export const LOCK_FILE = 'lock';

/** What a lock file records. */
export interface LockInfo {
  host: string;
  pid: number;
  /** ISO 8601 time the lock was taken. */
  started: string;
  /** The command line of the process holding it. */
  command: string;
}

/** Refused: another process holds the campaign's lock (or the lock cannot be checked). */
export class LockError extends Error {
  override name = 'LockError';
  constructor(
    message: string,
    readonly lockPath: string,
    readonly holder: Partial<LockInfo> | null,
  ) {
    super(message);
  }
  get host(): string | undefined {
    return this.holder?.host;
  }
  get pid(): number | undefined {
    return this.holder?.pid;
  }
}

export interface AcquireOptions {
  /** Recorded in the lock; default: process.argv joined. */
  command?: string;
  /** Where the takeover message goes; default: a line on stderr. */
  log?: (message: string) => void;
  /** Release the lock on SIGINT/SIGTERM/SIGHUP when nobody else handles the signal (default true). */
  handleSignals?: boolean;
}

export function lockPath(campaignDir: string): string {
  return join(campaignDir, RATCHET_DIR, LOCK_FILE);
}

/** The current holder of the campaign's lock, or null when unlocked (never takes the lock). */
export async function readLock(campaignDir: string): Promise<Partial<LockInfo> | null> {
  return readLockFile(lockPath(campaignDir));
}

async function readLockFile(path: string): Promise<Partial<LockInfo> | null> {
  let text: string;
  try {
    text = await fsp.readFile(path, 'utf8');
  } catch (err) {
    if ((err as NodeJS.ErrnoException).code === 'ENOENT') return null;
    throw err;
  }
  return parseLock(text);
}

function parseLock(text: string): Partial<LockInfo> {
  try {
    const v = JSON.parse(text) as unknown;
    if (v && typeof v === 'object') return v as Partial<LockInfo>;
  } catch {
    /* fall through: an unreadable lock (e.g. torn by a crash during creation) */
  }
  return {};
}

/** 'alive' | 'dead' | 'unknown' for a pid on this host. */
export function processState(pid: number): 'alive' | 'dead' | 'unknown' {
  if (!Number.isInteger(pid) || pid <= 0) return 'unknown';
  try {
    process.kill(pid, 0);
    return 'alive';
  } catch (err) {
    const code = (err as NodeJS.ErrnoException).code;
    if (code === 'ESRCH') return 'dead';
    if (code === 'EPERM') return 'alive'; // exists, owned by someone else
    return 'unknown';
  }
}

/**
 * Linux only: true when the process now holding `pid` started after `lockStarted`, i.e. the pid was
 * reused and cannot be the lock's holder. Undefined when it cannot be told (no /proc, odd values).
 * Uses /proc/<pid>/stat field 22 (start time in clock ticks after boot), /proc/stat btime, and
 * a clock tick of 1/100 s (USER_HZ, 100 on Linux: proc(5)); a margin of 5 s absorbs rounding.
 */
export function pidReusedSince(pid: number, lockStarted: string | undefined): boolean | undefined {
  if (!lockStarted) return undefined;
  const lockMs = Date.parse(lockStarted);
  if (!Number.isFinite(lockMs)) return undefined;
  try {
    const stat = readFileSync(`/proc/${pid}/stat`, 'utf8');
    const afterComm = stat.slice(stat.lastIndexOf(')') + 2).split(' ');
    // afterComm[0] is field 3 (state); field 22 is afterComm[19].
    const ticks = Number(afterComm[19]);
    const btimeLine = readFileSync('/proc/stat', 'utf8')
      .split('\n')
      .find((l) => l.startsWith('btime '));
    const btime = Number(btimeLine?.split(/\s+/)[1]);
    if (!Number.isFinite(ticks) || !Number.isFinite(btime)) return undefined;
    const startMs = btime * 1000 + ticks * 10;
    return startMs > lockMs + 5000;
  } catch {
    return undefined;
  }
}

/** A held lock. release() is idempotent. */
export class Lock {
  private released = false;
  private readonly onExit: () => void;
  private readonly signalHandlers: Array<[NodeJS.Signals, () => void]> = [];

  constructor(
    readonly path: string,
    readonly info: LockInfo,
    handleSignals: boolean,
  ) {
    this.onExit = () => this.releaseSync();
    process.on('exit', this.onExit);
    if (handleSignals) {
      for (const sig of ['SIGINT', 'SIGTERM', 'SIGHUP'] as NodeJS.Signals[]) {
        const handler = (): void => {
          // Someone else (e.g. the engine's Ctrl-C handling) also listens: leave the decision to them;
          // they will close the journal. Otherwise restore the default action after releasing.
          if (process.listenerCount(sig) > 1) return;
          this.releaseSync();
          process.kill(process.pid, sig);
        };
        process.on(sig, handler);
        this.signalHandlers.push([sig, handler]);
      }
    }
  }

  get held(): boolean {
    return !this.released;
  }

  private detach(): void {
    process.removeListener('exit', this.onExit);
    for (const [sig, h] of this.signalHandlers) process.removeListener(sig, h);
    this.signalHandlers.length = 0;
  }

  /** Remove the lock file, but only if it is still ours (same host, pid and start time). */
  async release(): Promise<void> {
    if (this.released) return;
    this.released = true;
    this.detach();
    const current = await readLockFile(this.path).catch(() => null);
    if (current && this.isOurs(current)) await fsp.unlink(this.path).catch(() => undefined);
  }

  /** Synchronous release for process 'exit' and signal paths. */
  releaseSync(): void {
    if (this.released) return;
    this.released = true;
    this.detach();
    try {
      const current = parseLock(readFileSync(this.path, 'utf8'));
      if (this.isOurs(current)) unlinkSync(this.path);
    } catch {
      /* already gone */
    }
  }

  private isOurs(other: Partial<LockInfo>): boolean {
    return other.host === this.info.host && other.pid === this.info.pid && other.started === this.info.started;
  }
}

function describe(info: Partial<LockInfo>): string {
  const parts = [`host ${info.host ?? '?'}`, `pid ${info.pid ?? '?'}`];
  if (info.started) parts.push(`since ${info.started}`);
  if (info.command) parts.push(`running "${info.command}"`);
  return parts.join(', ');
}

function currentCommand(): string {
  return process.argv.slice(1).join(' ');
}

/**
 * Take the campaign's lock (`<campaignDir>/.ratchet/lock`), creating `.ratchet/` if needed.
 * Throws LockError when another live process (or a process on another host) holds it.
 */
export async function acquireLock(campaignDir: string, opts: AcquireOptions = {}): Promise<Lock> {
  const dir = join(campaignDir, RATCHET_DIR);
  await fsp.mkdir(dir, { recursive: true });
  const path = join(dir, LOCK_FILE);
  const host = hostname();
  const log = opts.log ?? ((m: string) => process.stderr.write(`ratchet: ${m}\n`));
  const info: LockInfo = {
    host,
    pid: process.pid,
    started: new Date().toISOString(),
    command: opts.command ?? currentCommand(),
  };
  const handleSignals = opts.handleSignals ?? true;

  for (let attempt = 0; attempt < 5; attempt++) {
    if (await tryCreate(path, info)) return new Lock(path, info, handleSignals);

    const holder = await readLockFile(path);
    if (holder === null) continue; // released between our create and read: try again
    const state = staleness(holder, host, await ageMs(path));
    if (state.stale === false) {
      throw new LockError(
        `campaign is locked by ${describe(holder)} (${path}). ${state.why}`,
        path,
        holder,
      );
    }
    // Stale: take it over, one process at a time.
    const took = await takeOver(path, holder, info, host);
    if (took) {
      log(`took over a stale lock (${state.why}): ${describe(holder)}; lock file ${path}`);
      return new Lock(path, info, handleSignals);
    }
  }
  const holder = await readLockFile(path);
  throw new LockError(
    `could not take the campaign lock ${path} (held by ${describe(holder ?? {})}); another process keeps taking it`,
    path,
    holder,
  );
}

async function tryCreate(path: string, info: LockInfo): Promise<boolean> {
  let fh: fsp.FileHandle;
  try {
    fh = await fsp.open(path, 'wx', 0o644);
  } catch (err) {
    if ((err as NodeJS.ErrnoException).code === 'EEXIST') return false;
    throw err;
  }
  try {
    await fh.writeFile(JSON.stringify(info) + '\n');
    await fh.sync();
  } finally {
    await fh.close();
  }
  return true;
}

async function ageMs(path: string): Promise<number> {
  try {
    return Date.now() - (await fsp.stat(path)).mtimeMs;
  } catch {
    return 0;
  }
}

/** An unreadable lock older than this is a leftover of a crash between creating and writing it. */
const UNREADABLE_STALE_MS = 10_000;

function staleness(holder: Partial<LockInfo>, host: string, age: number): { stale: boolean; why: string } {
  const remedy = 'If you are sure no ratchet process is using this campaign, delete the lock file and run again.';
  if (typeof holder.host !== 'string' || typeof holder.pid !== 'number') {
    // An unreadable lock: a crash between creating the file and writing it (a live writer fills it
    // within milliseconds). Whose it was cannot be known; once it is old it is taken over.
    if (age > UNREADABLE_STALE_MS) return { stale: true, why: 'the lock file was empty or unreadable' };
    return { stale: false, why: `The lock file is being written or is unreadable. ${remedy}` };
  }
  if (holder.host !== host) {
    return {
      stale: false,
      why: `It was taken on another host (${holder.host}), whose processes cannot be checked from ${host}. ${remedy}`,
    };
  }
  const st = processState(holder.pid);
  if (st === 'dead') return { stale: true, why: `pid ${holder.pid} is no longer running on ${host}` };
  if (st === 'alive' && pidReusedSince(holder.pid, holder.started) === true) {
    return { stale: true, why: `pid ${holder.pid} now belongs to a process started after the lock was taken` };
  }
  if (holder.pid === process.pid) {
    return { stale: false, why: 'This process already holds it (open the journal once and share it).' };
  }
  return { stale: false, why: `That process is still running. ${remedy}` };
}

/** Replace a stale lock by ours; false when someone else got there first. */
async function takeOver(path: string, stale: Partial<LockInfo>, info: LockInfo, host: string): Promise<boolean> {
  const guard = `${path}.takeover`;
  const guardInfo = { host, pid: process.pid, started: new Date().toISOString() };
  if (!(await tryCreate(guard, guardInfo as LockInfo))) {
    // Another process is taking over right now, or died doing so.
    const g = await readLockFile(guard);
    if (g && g.host === host && g.pid !== undefined && processState(g.pid) === 'dead') {
      await fsp.unlink(guard).catch(() => undefined);
    } else {
      await new Promise((r) => setTimeout(r, 50));
    }
    return false;
  }
  try {
    const again = await readLockFile(path);
    if (again !== null) {
      // Still the same stale lock? (Someone may have replaced it before we took the guard.)
      if (again.pid !== stale.pid || again.started !== stale.started || again.host !== stale.host) return false;
      await fsp.unlink(path);
    }
    return await tryCreate(path, info);
  } finally {
    await fsp.unlink(guard).catch(() => undefined);
  }
}
