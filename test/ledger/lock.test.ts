/**
 * One writer at a time. The lock is created with O_CREAT|O_EXCL (POSIX open(2): fails with EEXIST if
 * the file exists, atomically), and liveness is checked with kill(pid, 0) (POSIX kill(2): ESRCH when
 * no such process). Each test uses separate OS processes, since that is what the lock is for.
 */
import { describe, expect, it, beforeEach } from 'vitest';
import { spawn, spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, mkdtempSync, readFileSync, utimesSync, writeFileSync } from 'node:fs';
import { hostname, tmpdir } from 'node:os';
import { join } from 'node:path';
import { Journal, LockError, acquireLock, pidReusedSince, readLock, lockPath } from '../../src/ledger/index.js';
import { startWriter } from './fixtures/child.js';

let dir: string;
beforeEach(() => {
  dir = mkdtempSync(join(tmpdir(), 'ratchet-lock-'));
});

/** A pid that certainly belonged to a process that has ended (a child we waited for). */
function deadPid(): number {
  const r = spawnSync('/bin/sh', ['-c', 'echo $$']);
  return Number(String(r.stdout).trim());
}

function writeLock(info: Record<string, unknown> | string): void {
  mkdirSync(join(dir, '.ratchet'), { recursive: true });
  writeFileSync(lockPath(dir), typeof info === 'string' ? info : JSON.stringify(info));
}

describe('campaign lock', () => {
  it('records host, pid, start time and command, and is removed on close', async () => {
    const j = await Journal.open(dir, { command: 'ratchet run c.yaml', handleSignals: false, log: () => undefined });
    const info = await readLock(dir);
    expect(info).toMatchObject({ host: hostname(), pid: process.pid, command: 'ratchet run c.yaml' });
    expect(Date.parse(info!.started!)).not.toBeNaN();
    await j.close();
    expect(existsSync(lockPath(dir))).toBe(false);
  });

  it('refuses a second process while the first holds the lock, naming host and pid', async () => {
    const holder = startWriter('hold', dir);
    try {
      await holder.waitFor((l) => l === 'ready');
      const err = await Journal.open(dir, { handleSignals: false }).catch((e: unknown) => e);
      expect(err).toBeInstanceOf(LockError);
      expect((err as LockError).pid).toBe(holder.proc.pid);
      expect((err as LockError).host).toBe(hostname());
      expect((err as Error).message).toContain(`host ${hostname()}, pid ${holder.proc.pid}`);
      expect((err as Error).message).toMatch(/still running/);
      // And from another process too.
      const other = startWriter('try', dir);
      const said = await other.waitFor((l) => l.startsWith('refused') || l === 'got');
      expect(said).toContain(`pid ${holder.proc.pid}`);
      await other.exited;
    } finally {
      holder.proc.kill('SIGKILL');
      await holder.exited;
    }
    // The holder died by SIGKILL: its lock is left behind, and the next open takes it over.
    const msgs: string[] = [];
    const j = await Journal.open(dir, { log: (m) => msgs.push(m), handleSignals: false });
    expect(msgs.join('\n')).toMatch(new RegExp(`took over a stale lock \\(pid ${holder.proc.pid} is no longer running`));
    await j.close();
  });

  it('takes over a stale lock naming a dead pid on this host, with a message', async () => {
    const pid = deadPid();
    writeLock({ host: hostname(), pid, started: new Date().toISOString(), command: 'ratchet run old' });
    const msgs: string[] = [];
    const lock = await acquireLock(dir, { log: (m) => msgs.push(m), handleSignals: false });
    expect(msgs).toHaveLength(1);
    expect(msgs[0]).toContain(`pid ${pid} is no longer running`);
    expect(msgs[0]).toContain('ratchet run old');
    expect(JSON.parse(readFileSync(lockPath(dir), 'utf8')).pid).toBe(process.pid);
    await lock.release();
  });

  it('tells a reused pid from the lock holder by its start time (Linux /proc, proc(5))', async () => {
    // This process started before now and long after 2000.
    expect(pidReusedSince(process.pid, new Date(Date.now() + 60_000).toISOString())).toBe(false);
    expect(pidReusedSince(process.pid, '2000-01-01T00:00:00.000Z')).toBe(true);
    // A live process that started after the lock was taken cannot hold it: taken over.
    const sleeper = spawn('sleep', ['30'], { stdio: 'ignore' });
    try {
      writeLock({ host: hostname(), pid: sleeper.pid, started: '2000-01-01T00:00:00.000Z', command: 'old run' });
      const msgs: string[] = [];
      const lock = await acquireLock(dir, { log: (m) => msgs.push(m), handleSignals: false });
      expect(msgs[0]).toContain(`pid ${sleeper.pid} now belongs to a process started after the lock was taken`);
      await lock.release();
      // The same live pid with a lock taken after it started is refused.
      writeLock({ host: hostname(), pid: sleeper.pid, started: new Date(Date.now() + 1000).toISOString(), command: 'run' });
      await expect(acquireLock(dir, { handleSignals: false })).rejects.toThrow(LockError);
    } finally {
      sleeper.kill('SIGKILL');
    }
  });

  it('refuses a lock from another host and says how to remove it', async () => {
    writeLock({ host: 'node-17.cluster.example', pid: 4242, started: new Date().toISOString(), command: 'ratchet run x' });
    const err = await acquireLock(dir, { handleSignals: false }).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(LockError);
    const m = (err as Error).message;
    expect(m).toContain('host node-17.cluster.example, pid 4242');
    expect(m).toMatch(/cannot be checked from/);
    expect(m).toMatch(/delete the lock file/);
    expect(m).toContain(lockPath(dir));
    // Untouched.
    expect(JSON.parse(readFileSync(lockPath(dir), 'utf8')).pid).toBe(4242);
  });

  it('takes over an old empty lock (a crash between creating and writing it) but not a fresh one', async () => {
    writeLock('');
    await expect(acquireLock(dir, { handleSignals: false })).rejects.toThrow(/being written or is unreadable/);
    const old = new Date(Date.now() - 60_000);
    utimesSync(lockPath(dir), old, old);
    const msgs: string[] = [];
    const lock = await acquireLock(dir, { log: (m) => msgs.push(m), handleSignals: false });
    expect(msgs[0]).toMatch(/empty or unreadable/);
    await lock.release();
  });

  it('lets exactly one of several processes take over the same stale lock', async () => {
    writeLock({ host: hostname(), pid: deadPid(), started: new Date().toISOString(), command: 'old' });
    // The winner holds the lock until told to stop, so a slow starter cannot come after it released.
    const kids = [startWriter('try', dir, 'forever'), startWriter('try', dir, 'forever'), startWriter('try', dir, 'forever')];
    try {
      const said = await Promise.all(kids.map((k) => k.waitFor((l) => l === 'got' || l.startsWith('refused'))));
      expect(said.filter((s) => s === 'got')).toHaveLength(1);
      expect(said.filter((s) => s.startsWith('refused'))).toHaveLength(2);
    } finally {
      for (const k of kids) k.proc.kill('SIGTERM');
      await Promise.all(kids.map((k) => k.exited));
    }
    expect(existsSync(lockPath(dir))).toBe(false);
  });

  it('releases the lock when the process exits without closing', async () => {
    const c = startWriter('exit', dir);
    await c.waitFor((l) => l === 'ready');
    expect((await c.exited).code).toBe(0);
    expect(existsSync(lockPath(dir))).toBe(false);
  });

  it('releases the lock on SIGTERM when nothing else handles it, and still dies by the signal', async () => {
    const c = startWriter('wait', dir);
    await c.waitFor((l) => l === 'ready');
    expect(existsSync(lockPath(dir))).toBe(true);
    c.proc.kill('SIGTERM');
    expect((await c.exited).signal).toBe('SIGTERM');
    expect(existsSync(lockPath(dir))).toBe(false);
  });

  it('refuses a second Journal in the same process', async () => {
    const j = await Journal.open(dir, { handleSignals: false, log: () => undefined, history: false });
    await expect(Journal.open(dir, { handleSignals: false })).rejects.toThrow(/This process already holds it/);
    expect(j.history).toEqual([]);
    await j.close();
  });

  it('does not remove a lock that is no longer its own', async () => {
    const lock = await acquireLock(dir, { handleSignals: false });
    writeLock({ host: 'elsewhere', pid: 1, started: 'x', command: 'y' });
    await lock.release();
    expect(existsSync(lockPath(dir))).toBe(true);
  });
});
