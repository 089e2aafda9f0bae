/**
 * The Grid Engine backend against a real one-host Son of Grid Engine 8.1.9 (Debian gridengine
 * packages, started by test/sge/cluster.sh when qstat cannot reach a qmaster; stopped again at the end
 * if this suite started it). Skipped, with a message, when sge_qmaster is not installed.
 *
 * Facts used (sge_submit(1), queue_conf(5), sge_status(5), SGE 8.1.9): h_rt is enforced with SIGKILL
 * (no exit record), and qacct then says failed 37 "qmaster enforced h_rt, h_cpu, or h_vmem limit";
 * array tasks are addressed <job>.<task>; -tc limits the running tasks of an array.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Submission, TaskSpec, TaskStatus } from '../../src/backends/backend.js';
import { SgeBackend } from '../../src/backends/sge.js';
import { removeTempDirs, task, tempDir, writeTask } from '../backends/cluster/helpers.js';

process.env.SGE_ROOT ??= '/var/lib/gridengine';
process.env.SGE_CELL ??= 'default';
const CLUSTER = join(import.meta.dirname, 'cluster.sh');
const installed = existsSync('/usr/sbin/sge_qmaster') && spawnSync('sh', ['-c', 'command -v qsub'], { encoding: 'utf8' }).status === 0;
if (!installed) console.warn('test/sge: Grid Engine (sge_qmaster) is not installed, so the real Grid Engine tests are skipped (bash test/sge/cluster.sh install installs it)');

const up = () => spawnSync('qstat', ['-f'], { encoding: 'utf8', timeout: 20_000 }).stdout?.includes('all.q@') === true;
let startedHere = false;
const mine: Submission[] = [];
const small = { cpus: 1, gpus: 0, memory_mb: 200, walltime_s: 120 };
const terminal = (s: TaskStatus) => s.state !== 'queued' && s.state !== 'running';

function backend(over: ConstructorParameters<typeof SgeBackend>[0] = {}): SgeBackend {
  return new SgeBackend({ pollIntervalS: 0.5, exitGraceS: 20, ...over });
}

async function settle(b: SgeBackend, subs: Submission[], limitMs = 120_000): Promise<TaskStatus[]> {
  const until = Date.now() + limitMs;
  for (;;) {
    const st = await b.poll(subs);
    if (st.every(terminal)) return st;
    if (Date.now() > until) throw new Error(`gave up waiting: ${st.map((s) => `${s.id} ${s.state} ${s.reason ?? ''}`).join('; ')}`);
    await new Promise((r) => setTimeout(r, 1000));
  }
}

async function submit(b: SgeBackend, tasks: TaskSpec[]): Promise<Submission[]> {
  const subs: Submission[] = [];
  await b.submit(tasks, (s) => {
    subs.push(s);
    mine.push(s);
  });
  return subs;
}

describe.skipIf(!installed)('real Grid Engine 8.1.9', () => {
  beforeAll(() => {
    if (!up()) {
      const r = spawnSync('bash', [CLUSTER, 'start'], { encoding: 'utf8', timeout: 120_000 });
      if (r.status !== 0) throw new Error(`test/sge/cluster.sh start failed:\n${r.stdout}\n${r.stderr}`);
      startedHere = true;
    }
  }, 150_000);

  afterAll(() => {
    for (const s of mine) spawnSync('qdel', [s.job_id.split('.')[0]]);
    if (startedHere) spawnSync('bash', [CLUSTER, 'stop'], { timeout: 60_000 });
    removeTempDirs();
  }, 90_000);

  it('runs an array with a throttle (one qsub), a failure with its exit code, and a walltime kill', async () => {
    const b = backend({ arrayThrottle: 1 });
    const root = tempDir();
    const arr = [0, 1, 2].map((i) => writeTask(b, task(root, String(i).padStart(4, '0'), { command: 'echo "$RATCHET_TASK" > out.txt', resources: small })));
    const bad = writeTask(b, task(tempDir(), '0000', { stage: 'train', command: 'exit 3', resources: { ...small, walltime_s: 300 } }));
    const wall = writeTask(b, task(tempDir(), '0000', { stage: 'simulate', command: 'sleep 120', resources: { ...small, walltime_s: 3 } }));
    const subs = await submit(b, [...arr, bad, wall]);
    expect(b.cli.calls.get('qsub')).toBe(3); // the array is one submission
    expect(subs.slice(0, 3).map((s) => s.job_id.split('.')[1])).toEqual(['1', '2', '3']);
    const detail = spawnSync('qstat', ['-j', subs[0].job_id.split('.')[0]], { encoding: 'utf8' }).stdout;
    expect(detail).toMatch(/maximum concurrency:\s+1\b/); // qstat -j of SGE 8.1.9
    const st = await settle(b, subs, 180_000);
    expect(st.map((s) => s.state)).toEqual(['succeeded', 'succeeded', 'succeeded', 'failed', 'walltime']);
    arr.forEach((t) => expect(readFileSync(join(t.dir, 'out.txt'), 'utf8')).toBe(`${t.id}\n`));
    expect(st[3].exit?.exit_code).toBe(3);
    expect(st[4].reason).toMatch(/failed 37/); // h_rt kill: SIGKILL, no exit record, qacct says so
  }, 200_000);

  it('preflight with qsub -w v accepts a good request and reports an unknown queue', async () => {
    const { preflight } = await import('../../src/backends/preflight.js');
    const b = backend();
    const r = await preflight(b, [task(tempDir(), '0000', { resources: small }), task(tempDir(), '0000', { stage: 'train', resources: { ...small, partition: 'nosuchq' } })]);
    expect(r.schedulerChecks).toBe(2);
    expect(r.problems.map((p) => [p.stage, p.kind])).toEqual([['r0/train', 'scheduler']]);
    expect(r.problems[0].message).toMatch(/unknown queue "nosuchq"/);
  });

  it('cancels a queued or running job, and calls an id it never had lost', async () => {
    const b = backend({ exitGraceS: 2 });
    const t = writeTask(b, task(tempDir(), '0000', { command: 'sleep 300', resources: { ...small, walltime_s: 600 } }));
    const subs = await submit(b, [t]);
    await b.cancel(subs);
    const [st] = await settle(b, subs, 60_000);
    expect(st.state).toBe('cancelled');
    const [lost] = await settle(b, [{ id: 'r0/label/0001', job_id: '999999', dir: tempDir() }], 60_000);
    expect(lost.state).toBe('lost');
  }, 90_000);

  it('tells a person\'s qdel of a waiting element from its own cancel; its own cancel of an array is one qdel', async () => {
    // -tc 1 keeps elements 2-4 waiting. A waiting element that a person deletes leaves no accounting
    // record (it never ran): seen waiting, then gone without a trace, it was cancelled outside ratchet.
    const b = backend({ exitGraceS: 2, arrayThrottle: 1 });
    const root = tempDir();
    const arr = [0, 1, 2, 3].map((i) => writeTask(b, task(root, String(i).padStart(4, '0'), { command: 'sleep 300', resources: { ...small, walltime_s: 600 } })));
    const subs = await submit(b, arr);
    const until = Date.now() + 60_000;
    for (;;) {
      const st = await b.poll(subs);
      if (st[0].state === 'running' && st[3].state === 'queued') break;
      if (Date.now() > until) throw new Error(`element 1 did not start: ${st.map((x) => x.state).join(' ')}`);
      await new Promise((r) => setTimeout(r, 1000));
    }
    const [job, fourth] = subs[3].job_id.split('.');
    expect(spawnSync('qdel', [job, '-t', fourth]).status).toBe(0);
    const [person] = await settle(b, [subs[3]], 90_000);
    expect([person.state, person.outside]).toEqual(['cancelled', true]);
    const before = b.cli.calls.get('qdel') ?? 0;
    await b.cancel(subs.slice(0, 3));
    expect((b.cli.calls.get('qdel') ?? 0) - before).toBe(1); // qdel <job> -t 1-3
    const own = await settle(b, subs.slice(0, 3), 90_000);
    expect(own.map((x) => [x.state, x.outside])).toEqual(Array(3).fill(['cancelled', undefined]));
  }, 200_000);
});
