import { existsSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import type { Submission, TaskSpec, TaskStatus } from '../../src/backends/backend.js';
import { BackendOptionError, LocalBackend } from '../../src/backends/local.js';
import { backendNames, getBackend, UnknownBackendError } from '../../src/backends/registry.js';
import { readExitRecordSync } from '../../src/backends/exit-record.js';
import { writeTaskFilesSync } from '../../src/backends/task-files.js';
import { alive, makeTask, removeTempDirs, tempDir, waitFor } from './helpers.js';

afterAll(removeTempDirs);

/** Tasks under a fresh campaign folder, with run.sh written by the backend's own render(). */
function setup(backend: LocalBackend, specs: Array<Partial<TaskSpec> & { command: string }>): { root: string; tasks: TaskSpec[] } {
  const root = tempDir('ratchet-local-');
  const tasks = specs.map((over, i) => {
    const t = makeTask(root, String(i).padStart(4, '0'), { ...over, env: { RATCHET_CAMPAIGN_DIR: root, ...over.env } });
    writeTaskFilesSync(t.dir, backend.render(t), { task: t.id });
    return t;
  });
  return { root, tasks };
}

async function submitAll(backend: LocalBackend, tasks: TaskSpec[]): Promise<Submission[]> {
  const subs: Submission[] = [];
  await backend.submit(tasks, (s) => {
    subs.push(s);
  });
  return subs;
}

const byId = (statuses: TaskStatus[]) => new Map(statuses.map((s) => [s.id, s]));

describe('local backend', () => {
  it('runs every task, at most `jobs` at once, and records each job id before its task starts', async () => {
    const backend = new LocalBackend({ jobs: 2 });
    const command = 'touch "$RATCHET_CAMPAIGN_DIR/running/$RATCHET_STAGE$$"; ls "$RATCHET_CAMPAIGN_DIR/running" | wc -l > count.txt; sleep 0.2; rm "$RATCHET_CAMPAIGN_DIR/running/$RATCHET_STAGE$$"; echo "$RATCHET_TASK"';
    const { root, tasks } = setup(backend, Array.from({ length: 6 }, () => ({ command })));
    mkdirSync(join(root, 'running'));
    const startedBeforeRecorded: string[] = [];
    const subs: Submission[] = [];
    await backend.submit(tasks, (s) => {
      if (existsSync(join(s.dir!, 'local.pid')) || existsSync(join(s.dir!, 'stdout.log'))) startedBeforeRecorded.push(s.id);
      subs.push(s);
    });
    expect(subs.map((s) => s.id)).toEqual(tasks.map((t) => t.id));
    expect(subs.every((s) => /^\d+\.\d+$/.test(s.job_id))).toBe(true);
    expect(new Set(subs.map((s) => s.job_id)).size).toBe(6);
    await backend.drain();
    expect(startedBeforeRecorded).toEqual([]);
    const counts = tasks.map((t) => Number(readFileSync(join(t.dir, 'count.txt'), 'utf8')));
    expect(Math.max(...counts)).toBeLessThanOrEqual(2);
    const statuses = await backend.poll(subs);
    expect(statuses.map((s) => s.state)).toEqual(Array(6).fill('succeeded'));
    expect(statuses.every((s) => s.exit?.exit_code === 0)).toBe(true);
    tasks.forEach((t) => expect(readFileSync(join(t.dir, 'stdout.log'), 'utf8')).toBe(`${t.id}\n`));
  });

  it('reports queued and running, then the outcome; failures carry the last lines of stderr.log', async () => {
    const backend = new LocalBackend({ jobs: 1 });
    const { root, tasks } = setup(backend, [
      { command: 'while [ ! -e "$RATCHET_CAMPAIGN_DIR/go" ]; do sleep 0.02; done; for i in 1 2 3 4 5; do echo "problem $i" >&2; done; exit 3' },
      { command: 'no-such-program-ratchet' },
      { command: 'kill -KILL $$' },
    ]);
    const subs = await submitAll(backend, tasks);
    await waitFor(() => existsSync(join(tasks[0].dir, 'local.pid')), 'the first task to start');
    let st = byId(await backend.poll(subs));
    expect(st.get(tasks[0].id)?.state).toBe('running');
    expect(st.get(tasks[1].id)?.state).toBe('queued');
    writeFileSync(join(root, 'go'), '');
    await backend.drain();
    st = byId(await backend.poll(subs));
    const a = st.get(tasks[0].id)!;
    expect(a.state).toBe('failed');
    expect(a.exit?.exit_code).toBe(3);
    expect(a.reason).toBe('exit code 3; last lines of stderr.log:\nproblem 1\nproblem 2\nproblem 3\nproblem 4\nproblem 5');
    const b = st.get(tasks[1].id)!;
    expect(b.state).toBe('failed');
    expect(b.reason).toMatch(/^exit code 127 \(command not found\); last lines of stderr.log:\n.*no-such-program-ratchet: command not found$/);
    // 137 = 128 + SIGKILL (9): GNU Bash Reference Manual 3.7.5; signal(7).
    const c = st.get(tasks[2].id)!;
    expect(c.state).toBe('failed');
    expect(c.exit?.exit_code).toBe(137);
    expect(c.reason).toMatch(/^killed by SIGKILL \(exit 137\)/);
  });

  it('cancels a running task (exit record 143) and a queued one (never starts)', async () => {
    const backend = new LocalBackend({ jobs: 1 });
    const { tasks } = setup(backend, [{ command: 'touch started; exec sleep 30' }, { command: 'touch ran' }]);
    const subs = await submitAll(backend, tasks);
    await waitFor(() => existsSync(join(tasks[0].dir, 'started')), 'the first task to start');
    await backend.cancel(subs);
    await backend.drain();
    const st = await backend.poll(subs);
    expect(st[0].state).toBe('cancelled');
    expect(st[0].exit?.exit_code).toBe(143);
    expect(st[1]).toEqual({ id: tasks[1].id, job_id: subs[1].job_id, state: 'cancelled', reason: 'cancelled before it started' });
    expect(existsSync(join(tasks[1].dir, 'ran'))).toBe(false);
    expect(existsSync(join(tasks[1].dir, 'stdout.log'))).toBe(false);
  });

  it('stopAll stops the whole process tree, with SIGKILL for what ignores SIGTERM', async () => {
    const backend = new LocalBackend({ jobs: 2, killGraceMs: 300 });
    const { tasks } = setup(backend, [
      { command: 'sleep 30 & echo $! > gc.pid; wait' },
      { command: "trap '' TERM; echo $$ > cmd.pid; while :; do sleep 0.05; done" },
      { command: 'touch ran' },
    ]);
    const subs = await submitAll(backend, tasks);
    await waitFor(() => existsSync(join(tasks[0].dir, 'gc.pid')) && existsSync(join(tasks[1].dir, 'cmd.pid')), 'both tasks to start');
    const grandchild = Number(readFileSync(join(tasks[0].dir, 'gc.pid'), 'utf8'));
    const stubborn = Number(readFileSync(join(tasks[1].dir, 'cmd.pid'), 'utf8'));
    await backend.stopAll();
    await waitFor(() => !alive(grandchild) && !alive(stubborn), 'the process trees to end', 5_000);
    const st = await backend.poll(subs);
    expect(st.map((s) => s.state)).toEqual(['cancelled', 'cancelled', 'cancelled']);
    expect(st[0].exit?.exit_code).toBe(143);
    expect(st[1].exit).toBeUndefined(); // killed with SIGKILL before it could write a record
    expect(existsSync(join(tasks[2].dir, 'ran'))).toBe(false);
  });

  it('reports a task whose script vanished without an exit record as lost', async () => {
    const backend = new LocalBackend({ jobs: 1 });
    const { tasks } = setup(backend, [{ command: 'kill -KILL $PPID; sleep 5' }]);
    const subs = await submitAll(backend, tasks);
    await backend.drain();
    const [s] = await backend.poll(subs);
    expect(s.state).toBe('lost');
    expect(s.reason).toMatch(/no exit record: the batch script was killed by SIGKILL/);
  });

  it('enforces the walltime', async () => {
    const backend = new LocalBackend({ jobs: 1 });
    const { tasks } = setup(backend, [{ command: 'exec sleep 30', resources: { cpus: 1, gpus: 0, walltime_s: 1 } }]);
    const subs = await submitAll(backend, tasks);
    await backend.drain();
    const [s] = await backend.poll(subs);
    expect(s.state).toBe('walltime');
    expect(s.exit?.exit_code).toBe(143);
    expect(s.reason).toBe('exceeded walltime 00:00:01 (exit 143)');
  });

  it('never starts a task that has an exit record; its record decides the state', async () => {
    const backend = new LocalBackend({ jobs: 1 });
    const { tasks } = setup(backend, [{ command: 'touch ran' }]);
    writeFileSync(join(tasks[0].dir, 'exit.json'), '{"exit_code":0,"start":"2024-01-01T00:00:00Z","end":"2024-01-01T00:00:05Z","host":"h"}');
    const subs = await submitAll(backend, tasks);
    await backend.drain();
    expect(existsSync(join(tasks[0].dir, 'ran'))).toBe(false);
    expect(existsSync(join(tasks[0].dir, 'local.pid'))).toBe(false);
    expect((await backend.poll(subs))[0].state).toBe('succeeded');
  });

  it('after a restart: sees a task still running under the earlier process, refuses to start it twice, and can stop it', async () => {
    const first = new LocalBackend({ jobs: 2 });
    const { root, tasks } = setup(first, [
      { command: 'touch started; while [ ! -e "$RATCHET_CAMPAIGN_DIR/go" ]; do sleep 0.02; done' },
      { command: 'touch started; exec sleep 30' },
    ]);
    const subs = await submitAll(first, tasks);
    await waitFor(() => tasks.every((t) => existsSync(join(t.dir, 'started'))), 'both tasks to start');
    const later = new LocalBackend({ jobs: 2 }); // as a new ratchet process would
    const foreign = subs.map((s) => ({ id: s.id, job_id: s.job_id, dir: s.dir }));
    expect((await later.poll(foreign)).map((s) => s.state)).toEqual(['running', 'running']);
    await expect(later.submit([tasks[0]], () => undefined)).rejects.toThrow(/still running as pid \d+/);
    await expect(later.poll([{ id: 'x', job_id: '1.1' }])).rejects.toThrow(/carries no dir/);
    await later.cancel([foreign[1]]);
    writeFileSync(join(root, 'go'), '');
    await first.drain();
    const st = await later.poll(foreign);
    expect(st[0].state).toBe('succeeded');
    expect(st[1].state).toBe('cancelled');
    expect(st[1].reason).toBe('stopped by SIGTERM (exit 143) before it finished');
  });

  it('reports lost for a task of an earlier process that left no record and no live process', async () => {
    const root = tempDir();
    const t = makeTask(root, '0000');
    writeFileSync(join(t.dir, 'local.pid'), '999999999 ' + (await import('node:os')).hostname() + '\n');
    writeFileSync(join(t.dir, 'exit.json'), '{"exit_code":0,"st'); // half-written: treated as absent
    const backend = new LocalBackend();
    const [s] = await backend.poll([{ id: t.id, job_id: '1.1', dir: t.dir }]);
    expect(s.state).toBe('lost');
    expect(readExitRecordSync(t.dir)).toBeUndefined();
  });

  it('refuses bad input before submitting anything', async () => {
    const backend = new LocalBackend({ jobs: 1 });
    const root = tempDir();
    const t = makeTask(root, '0000'); // no run.sh written
    let called = 0;
    await expect(backend.submit([t], () => void called++)).rejects.toThrow(/run.sh does not exist/);
    expect(called).toBe(0);
    expect(() => new LocalBackend({ jobs: 0 })).toThrow(BackendOptionError);
    expect(() => new LocalBackend({ jobs: 1.5 })).toThrow('--jobs: expected a whole number of at least 1, found 1.5');
  });
});

describe('backend registry', () => {
  it('makes backends by name and names the known ones for an unknown name', () => {
    const b = getBackend('local', { jobs: 3 });
    expect(b.name).toBe('local');
    expect((b as LocalBackend).jobs).toBe(3);
    expect(backendNames()).toContain('local');
    expect(() => getBackend('lcoal')).toThrow(UnknownBackendError);
    // The message lists every registered backend (cluster backends register beside local).
    expect(() => getBackend('lcoal')).toThrow(`unknown backend "lcoal": expected one of ${backendNames().join(', ')} (did you mean "local"?)`);
  });
});
