/**
 * The Slurm backend against a real one-node Slurm (Debian slurm 22.05, started through test/slurm/cluster.ts
 * when sinfo cannot reach a controller, stopped by the global teardown if a test started it).
 * Skipped, with a message, only when slurmctld is not installed (.ci/run installs it).
 *
 * Facts used (Slurm 22.05.8 on these machines, see issue 5): array elements are addressed
 * ARRAYID_INDEX; finished jobs stay in `squeue -t all` for MinJobAge (86400 s in cluster.sh). A walltime
 * kill and its escalation are tested through the engine, in campaign.test.ts.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Submission, TaskSpec, TaskStatus } from '../../src/backends/backend.js';
import { readExitRecord } from '../../src/backends/exit-record.js';
import { preflight } from '../../src/backends/preflight.js';
import { SlurmBackend } from '../../src/backends/slurm.js';
import { removeTempDirs, task, tempDir, writeTask } from '../backends/cluster/helpers.js';
import { ensureSlurm, slurmInstalled } from './cluster.js';

if (!slurmInstalled) console.warn('test/slurm: slurmctld is not installed, so the real-Slurm tests are skipped (bash test/slurm/cluster.sh install, as .ci/run does, installs it)');

const mine: Submission[] = [];

function backend(over: ConstructorParameters<typeof SlurmBackend>[0] = {}): SlurmBackend {
  return new SlurmBackend({ pollIntervalS: 0.5, exitGraceS: 5, ...over });
}

const terminal = (s: TaskStatus) => s.state !== 'queued' && s.state !== 'running';

/** Poll until every submission has ended (a guard limit, not a timing assertion). */
async function settle(b: SlurmBackend, subs: Submission[], limitMs = 120_000): Promise<TaskStatus[]> {
  const until = Date.now() + limitMs;
  for (;;) {
    const st = await b.poll(subs);
    if (st.every(terminal)) return st;
    if (Date.now() > until) throw new Error(`gave up waiting: ${st.map((s) => `${s.id} ${s.state} ${s.reason ?? ''}`).join('; ')}`);
    await new Promise((r) => setTimeout(r, Math.max(500, Math.min(2000, b.nextPollDelayMs()))));
  }
}

async function submit(b: SlurmBackend, tasks: TaskSpec[]): Promise<Submission[]> {
  const subs: Submission[] = [];
  await b.submit(tasks, (s) => {
    subs.push(s);
    mine.push(s);
  });
  return subs;
}

const small = { cpus: 1, gpus: 0, memory_mb: 50, walltime_s: 120 };

describe.skipIf(!slurmInstalled)('real Slurm 22.05', () => {
  beforeAll(() => ensureSlurm(), 180_000);

  afterAll(() => {
    if (mine.length) spawnSync('scancel', mine.map((s) => s.job_id));
    removeTempDirs();
  }, 90_000);

  it('runs single tasks: success, and a failure with its exit code and log', async () => {
    const b = backend();
    const root = tempDir();
    const ok = writeTask(b, task(root, '0000', { command: 'echo fine', resources: small }));
    const bad = writeTask(b, task(root, '0001', { command: 'echo "it broke" >&2; exit 3', resources: { ...small, walltime_s: 180 } }));
    const subs = await submit(b, [ok, bad]);
    expect(b.cli.calls.get('sbatch')).toBe(2); // different resources: two single jobs
    expect(subs.every((s) => /^\d+$/.test(s.job_id))).toBe(true);
    const [a, c] = await settle(b, subs);
    expect(a.state).toBe('succeeded');
    expect(a.exit?.exit_code).toBe(0);
    expect(c.state).toBe('failed');
    expect(c.exit?.exit_code).toBe(3);
    expect(c.reason).toMatch(/^exit code 3; last lines of stderr\.log:\nit broke$/);
  });

  it('submits an array with a throttle: one sbatch per array, split at max_array_size', async () => {
    const b = backend({ maxArraySize: 3, arrayThrottle: 2 });
    const root = tempDir();
    const tasks = [0, 1, 2, 3, 4].map((i) => writeTask(b, task(root, String(i).padStart(4, '0'), { command: 'echo "$RATCHET_TASK" > out.txt', resources: small })));
    const subs = await submit(b, tasks);
    expect(b.cli.calls.get('sbatch')).toBe(2); // 3 + 2 elements
    expect(subs.map((s) => s.job_id.replace(/^\d+_/, ''))).toEqual(['1', '2', '3', '1', '2']);
    // The scheduler holds the throttle (scontrol show job: ArrayTaskThrottle).
    const show = spawnSync('scontrol', ['show', 'job', '-o', subs[0].job_id], { encoding: 'utf8' }).stdout;
    expect(show).toMatch(/ArrayTaskThrottle=2\b/);
    const st = await settle(b, subs);
    expect(st.map((s) => s.state)).toEqual(['succeeded', 'succeeded', 'succeeded', 'succeeded', 'succeeded']);
    // Each element ran its own task: the manifest line k -> task k.
    tasks.forEach((t) => expect(readFileSync(join(t.dir, 'out.txt'), 'utf8')).toBe(`${t.id}\n`));
  });

  it('submits a stage of 200 tasks as one throttled array, polls it in one call, cancels it', async () => {
    const b = backend({ arrayThrottle: 5, pollIntervalS: 0 });
    const root = tempDir();
    const tasks = Array.from({ length: 200 }, (_, i) => writeTask(b, task(root, String(i).padStart(4, '0'), { command: 'sleep 30', resources: { ...small, walltime_s: 300 } })));
    const subs = await submit(b, tasks);
    expect(b.cli.calls.get('sbatch')).toBe(1);
    const squeueBefore = b.cli.calls.get('squeue') ?? 0;
    const st = await b.poll(subs);
    expect((b.cli.calls.get('squeue') ?? 0) - squeueBefore).toBe(1);
    expect(st.every((s) => s.state === 'queued' || s.state === 'running')).toBe(true);
    expect(st.filter((s) => s.state === 'running').length).toBeLessThanOrEqual(5);
    await b.cancel(subs);
    const after = await settle(b, subs, 60_000);
    expect(new Set(after.map((s) => s.state))).toEqual(new Set(['cancelled']));
  });

  it('asks the scheduler once per poll cycle, whatever the number of jobs', async () => {
    const b = backend({ pollIntervalS: 0 });
    const root = tempDir();
    const tasks = [0, 1, 2, 3].map((i) => writeTask(b, task(root, String(i).padStart(4, '0'), { command: 'sleep 2', resources: small })));
    const subs = await submit(b, tasks);
    const before = b.cli.calls.get('squeue') ?? 0;
    await b.poll(subs);
    expect((b.cli.calls.get('squeue') ?? 0) - before).toBe(1);
    await settle(b, subs);
  });

  it('cancels a running job', async () => {
    const b = backend();
    const t = writeTask(b, task(tempDir(), '0000', { command: 'sleep 300', resources: { ...small, walltime_s: 600 } }));
    const subs = await submit(b, [t]);
    const until = Date.now() + 60_000;
    // Slurm shows RUNNING while slurmd is still launching the script; cancel only once the script has
    // set its traps, which it has when it has opened stdout.log (templates/common.sh).
    while ((await b.poll(subs))[0].state !== 'running' || !existsSync(join(t.dir, 'stdout.log'))) {
      if (Date.now() > until) throw new Error('the job did not start');
      await new Promise((r) => setTimeout(r, 500));
    }
    await b.cancel(subs);
    const [st] = await settle(b, subs);
    expect(st.state).toBe('cancelled');
    // The script trapped SIGTERM and wrote its record: 128 + 15. squeue may show CANCELLED a moment
    // before the trap has renamed exit.json into place, so wait for the record itself.
    let rec = st.exit;
    for (let k = 0; !rec && k < 40; k++) {
      await new Promise((r) => setTimeout(r, 250));
      rec = await readExitRecord(t.dir);
    }
    expect(rec?.exit_code).toBe(143);
  });

  it('reports a job id the scheduler never had as lost', async () => {
    const b = backend({ exitGraceS: 1 });
    const [st] = await settle(b, [{ id: 'r0/label/0000', job_id: '999999', dir: tempDir() }], 30_000);
    expect(st.state).toBe('lost');
    expect(st.reason).toMatch(/does not know job 999999/);
  });

  it('preflight: sbatch --test-only accepts a good request and names the stage of a bad one', async () => {
    const b = backend();
    const root = tempDir();
    const good = task(root, '0000', { resources: small });
    const bad = task(root, '0000', { stage: 'train', resources: { ...small, partition: 'nosuchpartition' } });
    const r = await preflight(b, [good, bad]);
    expect(r.schedulerChecks).toBe(2);
    expect(r.problems).toHaveLength(1);
    expect(r.problems[0]).toMatchObject({ stage: 'r0/train', kind: 'scheduler', tasks: ['r0/train/0000'] });
    expect(r.problems[0].message).toMatch(/invalid partition/i);
    expect(spawnSync('squeue', ['-h', '-n', 'nosuchpartition']).stdout.length).toBe(0);
  });
});
