/**
 * A cancel made outside ratchet (scancel, qdel, bkill, Grid Engine qdel) is told apart from one ratchet
 * made itself: the status says `outside`, so the engine holds the task instead of resubmitting it.
 * The scheduler's answers are the documented samples of classes.test.ts (samples/README.md names each
 * source): Slurm job 18 CANCELLED, PBS 106.pbs01 Exit_status 271 (256 + SIGTERM: qdel of a running
 * job), LSF 2007 EXIT TERM_OWNER (bkill by the owner), Grid Engine 23 (qacct failed 17 "through
 * signal"). And `ratchet stop`'s cancel is one scheduler call for all of a campaign's ids.
 */
import { mkdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import type { Submission } from '../../../src/backends/backend.js';
import type { ClusterBackend } from '../../../src/backends/cluster.js';
import { LsfBackend } from '../../../src/backends/lsf.js';
import { PbsBackend } from '../../../src/backends/pbs.js';
import { SgeBackend } from '../../../src/backends/sge.js';
import { SlurmBackend } from '../../../src/backends/slurm.js';
import { fakeRunner, removeTempDirs, tempDir, writeExit, type Handler } from './helpers.js';

afterAll(removeTempDirs);

const SAMPLES = join(import.meta.dirname, 'samples');
const sample = (f: string) => readFileSync(join(SAMPLES, f), 'utf8');

interface Case {
  name: string;
  make: (runner: ReturnType<typeof fakeRunner>['runner']) => ClusterBackend;
  handlers: Record<string, Handler>;
  cancelCmd: string;
  /** A job the sample shows cancelled, and the exit record its trap wrote (null: none). */
  cancelled: [jobId: string, exit: number | null];
  /** Three ids of one array, as ratchet records them (cancelled with one call). */
  array: string[];
}

const CASES: Case[] = [
  {
    name: 'slurm',
    make: (runner) => new SlurmBackend({ runner, pollIntervalS: 30, exitGraceS: 0 }),
    handlers: {
      squeue: () => ({ stdout: sample('slurm-squeue.txt') }),
      sacct: () => ({ exitCode: 1, stderr: 'sacct: error: Slurm accounting storage is disabled\n' }),
      scontrol: () => ({ stdout: '' }),
      scancel: () => ({}),
    },
    cancelCmd: 'scancel',
    cancelled: ['18', null],
    array: ['41_1', '41_2', '41_3'],
  },
  {
    name: 'pbs',
    make: (runner) => new PbsBackend({ runner, pollIntervalS: 30, exitGraceS: 0 }),
    handlers: { qstat: () => ({ stdout: sample('pbs-qstat.json') }), qdel: () => ({}) },
    cancelCmd: 'qdel',
    cancelled: ['106.pbs01', 143],
    array: ['123[1].pbs01', '123[2].pbs01', '123[3].pbs01'],
  },
  {
    name: 'lsf',
    make: (runner) => new LsfBackend({ runner, pollIntervalS: 30, exitGraceS: 0 }),
    handlers: { bjobs: () => ({ stdout: sample('lsf-bjobs.txt') }), bkill: () => ({}) },
    cancelCmd: 'bkill',
    cancelled: ['2007', 130],
    array: ['2010[1]', '2010[2]', '2010[3]'],
  },
  {
    name: 'sge',
    make: (runner) => new SgeBackend({ runner, pollIntervalS: 30, exitGraceS: 0 }),
    handlers: {
      qstat: () => ({ stdout: sample('sge-qstat.txt') }),
      qacct: (args) =>
        args[1] === '23' ? { stdout: '==============================================================\njobnumber 23\ntaskid undefined\nfailed 17  : through signal\nexit_status 137\n' } : { exitCode: 1, stderr: `error: job id ${args[1]} not found\n` },
      qdel: () => ({}),
    },
    cancelCmd: 'qdel',
    cancelled: ['23', null],
    array: ['312.1', '312.2', '312.3'],
  },
];

describe.each(CASES)('$name', (c) => {
  function sub(): Submission {
    const dir = join(tempDir(), 't');
    mkdirSync(dir, { recursive: true });
    if (c.cancelled[1] !== null) writeExit(dir, c.cancelled[1]);
    return { id: 'r0/label/0000', job_id: c.cancelled[0], dir };
  }

  it('a job cancelled by a person is cancelled and outside', async () => {
    const fake = fakeRunner(c.handlers);
    const [s] = await c.make(fake.runner).poll([sub()]);
    expect(s.state).toBe('cancelled');
    expect(s.outside).toBe(true);
  });

  it('a job this backend cancelled is cancelled, not outside', async () => {
    const fake = fakeRunner(c.handlers);
    const b = c.make(fake.runner);
    const one = sub();
    await b.cancel([one]);
    const [s] = await b.poll([one]);
    expect(s.state).toBe('cancelled');
    expect(s.outside).toBeUndefined();
  });

  it('cancels the three elements of an array with one scheduler call', async () => {
    const fake = fakeRunner(c.handlers);
    const b = c.make(fake.runner);
    const root = tempDir();
    await b.cancel(c.array.map((id, k) => ({ id: `r0/label/000${k}`, job_id: id, dir: join(root, String(k)) })));
    expect(fake.count(c.cancelCmd)).toBe(1);
    const call = fake.log.find((l) => l.cmd === c.cancelCmd)!;
    // Grid Engine addresses array elements by range (qdel 312 -t 1-3); the others take every id.
    if (c.name === 'sge') expect(call.args).toEqual(['312', '-t', '1-3']);
    else expect(call.args).toEqual(c.array);
  });
});

describe('a waiting job that leaves the queue without a trace', () => {
  // Seen with Slurm 22.05 on the test cluster (no accounting): `scancel 13_3` of a pending array element
  // removes it from `squeue -t all`, and jobcomp/filetxt writes no line for it. Grid Engine's qacct has no
  // record of a job that never ran.
  const handlers = (queue: () => string): Record<string, Handler> => ({
    squeue: () => ({ stdout: queue() }),
    sacct: () => ({ exitCode: 1, stderr: 'sacct: error: Slurm accounting storage is disabled\n' }),
    scontrol: () => ({ stdout: '' }),
  });

  it('is cancelled outside ratchet when it was last seen waiting, lost when it was seen running', async () => {
    let queue = '13|13|3|PENDING|JobArrayTaskLimit|0|N/A|x.r0.label.a1|\n14|13|1|RUNNING|None|0|N/A|x.r0.label.a1|\n';
    let now = 1_000_000;
    const fake = fakeRunner(handlers(() => queue));
    const b = new SlurmBackend({ runner: fake.runner, pollIntervalS: 0, exitGraceS: 60, now: () => now });
    const root = tempDir();
    const subs = ['13_3', '13_1'].map((id, k) => {
      const dir = join(root, String(k));
      mkdirSync(dir, { recursive: true });
      return { id: `r0/label/000${k}`, job_id: id, dir };
    });
    expect((await b.poll(subs)).map((s) => s.state)).toEqual(['queued', 'running']);
    queue = '';
    // Within the grace (late files on a shared file system): still waiting for a record.
    // (the waiting one stays queued meanwhile, so no start is recorded for it).
    expect((await b.poll(subs)).map((s) => s.state)).toEqual(['queued', 'running']);
    now += 61_000;
    const [waited, ran] = await b.poll(subs);
    expect(waited).toMatchObject({ state: 'cancelled', outside: true });
    expect(ran.state).toBe('lost');
    expect(ran.outside).toBeUndefined();
  });

  it('a later process decides from the caller: never seen running (neverStarted) or not', async () => {
    const fake = fakeRunner(handlers(() => ''));
    const b = new SlurmBackend({ runner: fake.runner, pollIntervalS: 0, exitGraceS: 0 });
    const root = tempDir();
    mkdirSync(join(root, 'a'), { recursive: true });
    mkdirSync(join(root, 'b'), { recursive: true });
    const [a, c] = await b.poll([
      { id: 'r0/label/0000', job_id: '20_1', dir: join(root, 'a'), neverStarted: true },
      { id: 'r0/label/0001', job_id: '20_2', dir: join(root, 'b') },
    ]);
    expect(a).toMatchObject({ state: 'cancelled', outside: true });
    expect(c.state).toBe('lost');
  });
});

