/**
 * Submission through a fake scheduler: one call per array, ids handed over one task at a time before
 * the next call, transient errors retried with back-off, a submission that went through although the
 * client timed out adopted instead of repeated, permanent errors reported at once.
 */
import { readFileSync } from 'node:fs';
import { afterAll, describe, expect, it } from 'vitest';
import type { Submission, TaskSpec } from '../../../src/backends/backend.js';
import { planUnits } from '../../../src/backends/arrays.js';
import { LsfBackend } from '../../../src/backends/lsf.js';
import { PbsBackend } from '../../../src/backends/pbs.js';
import { SchedulerCommandError } from '../../../src/backends/scheduler-cli.js';
import { SgeBackend } from '../../../src/backends/sge.js';
import { SlurmBackend } from '../../../src/backends/slurm.js';
import { fakeRunner, noSleep, removeTempDirs, task, tempDir, writeTask } from './helpers.js';

afterAll(removeTempDirs);

function tasks(backend: { render(t: TaskSpec): string }, n: number, root = tempDir()): TaskSpec[] {
  return Array.from({ length: n }, (_, i) => writeTask(backend, task(root, String(i).padStart(4, '0'))));
}

describe('Slurm submission', () => {
  it('submits 5 tasks with max_array_size 3 as two arrays: two sbatch calls, ids ARRAY_INDEX in order', async () => {
    let next = 40;
    const events: string[] = [];
    const fake = fakeRunner({
      squeue: () => ({ stdout: '' }),
      sbatch: (args) => {
        events.push(`sbatch ${args[args.length - 1].split('/').pop()}`);
        return { stdout: `${++next}\n` };
      },
    });
    const b = new SlurmBackend({ runner: fake.runner, maxArraySize: 3, arrayThrottle: 2, sleep: noSleep });
    const ts = tasks(b, 5);
    const got: Submission[] = [];
    await b.submit(ts, async (s) => {
      events.push(`recorded ${s.id}`);
      got.push(s);
    });
    expect(fake.count('sbatch')).toBe(2);
    expect(got.map((s) => [s.id, s.job_id])).toEqual([
      ['r0/label/0000', '41_1'],
      ['r0/label/0001', '41_2'],
      ['r0/label/0002', '41_3'],
      ['r0/label/0003', '42_1'],
      ['r0/label/0004', '42_2'],
    ]);
    // Every id of the first array is recorded before the second sbatch.
    expect(events.map((e) => e.split(' ')[0])).toEqual(['sbatch', 'recorded', 'recorded', 'recorded', 'sbatch', 'recorded', 'recorded']);
    // The array script carries the throttle; it is submitted from the .arrays folder.
    const sb = fake.log.filter((c) => c.cmd === 'sbatch');
    expect(sb[0].args[0]).toBe('--parsable');
    expect(sb[0].cwd).toMatch(/rounds\/0\/label\/\.arrays$/);
    expect(readFileSync(sb[0].args[1], 'utf8')).toContain('#SBATCH --array=1-3%2');
  });

  it('submits a lone task as a plain job from its own folder', async () => {
    const fake = fakeRunner({ squeue: () => ({ stdout: '' }), sbatch: () => ({ stdout: '77\n' }) });
    const b = new SlurmBackend({ runner: fake.runner });
    const [t] = tasks(b, 1);
    const got: Submission[] = [];
    await b.submit([t], (s) => void got.push(s));
    expect(got).toEqual([{ id: t.id, job_id: '77', dir: t.dir }]);
    expect(fake.log.find((c) => c.cmd === 'sbatch')).toMatchObject({ args: ['--parsable', `${t.dir}/run.sh`], cwd: t.dir });
  });

  it('retries transient errors with back-off, then succeeds', async () => {
    let n = 0;
    const sleeps: number[] = [];
    const fake = fakeRunner({
      squeue: () => ({ stdout: '' }),
      sbatch: () => (++n <= 2 ? { exitCode: 1, stderr: 'sbatch: error: Batch job submission failed: Socket timed out on send/recv operation\n' } : { stdout: '90\n' }),
    });
    const b = new SlurmBackend({ runner: fake.runner, submitRetries: 3, sleep: async (ms) => void sleeps.push(ms), backoffBaseMs: 1000 });
    const ts = tasks(b, 1);
    const got: Submission[] = [];
    await b.submit(ts, (s) => void got.push(s));
    expect(got[0].job_id).toBe('90');
    expect(fake.count('sbatch')).toBe(3);
    expect(sleeps).toHaveLength(2);
    expect(sleeps[0]).toBeGreaterThanOrEqual(1000);
    expect(sleeps[1]).toBeGreaterThanOrEqual(2000); // doubled
  });

  it('adopts the job when a timed-out sbatch went through (no second submission)', async () => {
    let submitted = false;
    const b0 = new SlurmBackend();
    const ts = tasks(b0, 3);
    const name = planUnits(ts, { maxArraySize: 1000 })[0].name;
    const fake = fakeRunner({
      squeue: () => ({ stdout: submitted ? `55|${name}\n55|${name}\n` : '' }),
      sbatch: () => {
        submitted = true;
        return { exitCode: null, timedOut: true };
      },
    });
    const b = new SlurmBackend({ runner: fake.runner, sleep: noSleep });
    const got: Submission[] = [];
    await b.submit(ts, (s) => void got.push(s));
    expect(fake.count('sbatch')).toBe(1);
    expect(got.map((s) => s.job_id)).toEqual(['55_1', '55_2', '55_3']);
  });

  it('adopts a live job of the same name left by a run that crashed before recording it', async () => {
    const b0 = new SlurmBackend();
    const ts = tasks(b0, 1);
    const name = planUnits(ts, { maxArraySize: 1000 })[0].name;
    const fake = fakeRunner({ squeue: () => ({ stdout: `61|${name}\n` }), sbatch: () => ({ stdout: '62\n' }) });
    const b = new SlurmBackend({ runner: fake.runner });
    const got: Submission[] = [];
    await b.submit(ts, (s) => void got.push(s));
    expect(fake.count('sbatch')).toBe(0);
    expect(got[0].job_id).toBe('61');
  });

  it('adopts the unrecorded elements of an array a crashed run submitted, and only those still queued or running', async () => {
    // The crash: an array of 4 submitted, the run killed after recording 2 element ids.
    const first = fakeRunner({ squeue: () => ({ stdout: '' }), sbatch: () => ({ stdout: '41\n' }) });
    const b1 = new SlurmBackend({ runner: first.runner });
    const ts = tasks(b1, 4);
    const name = planUnits(ts, { maxArraySize: 1000 })[0].name;
    let recorded = 0;
    await expect(
      b1.submit(ts, () => {
        if (++recorded > 2) throw new Error('killed');
      }),
    ).rejects.toThrow('killed');
    // The next run submits the two unrecorded tasks. squeue (format of squeue(1), Slurm 22.05, as in
    // samples/slurm-squeue.txt): element 3 has already ended, element 4 is still pending.
    const fake = fakeRunner({
      squeue: (args) =>
        args.includes('%F|%j')
          ? { stdout: `41|${name}\n` }
          : { stdout: `41|41|3|COMPLETED|None|0|2026-12-01T23:10:43|${name}|\n41|41|4|PENDING|JobArrayTaskLimit|0|N/A|${name}|\n` },
      sbatch: () => ({ stdout: '42\n' }),
    });
    const b2 = new SlurmBackend({ runner: fake.runner, sleep: noSleep });
    const got: Submission[] = [];
    await b2.submit(ts.slice(2), (s) => void got.push(s));
    expect(got.map((s) => [s.id, s.job_id, s.adopted ?? false])).toEqual([
      ['r0/label/0003', '41_4', true],
      ['r0/label/0002', '42', false],
    ]);
    expect(fake.count('sbatch')).toBe(1);
  });

  it('reports a permanent error at once, naming the command and the message', async () => {
    const fake = fakeRunner({ squeue: () => ({ stdout: '' }), sbatch: () => ({ exitCode: 1, stderr: 'sbatch: error: invalid partition specified: nope\nsbatch: error: Batch job submission failed: Invalid partition name specified\n' }) });
    const b = new SlurmBackend({ runner: fake.runner, sleep: noSleep });
    const ts = tasks(b, 1);
    const err = await b.submit(ts, () => {}).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(SchedulerCommandError);
    expect((err as Error).message).toMatch(/^sbatch --parsable .*: sbatch: error: invalid partition specified: nope$/);
    expect(fake.count('sbatch')).toBe(1);
  });

  it('gives up after submit_retries transient failures', async () => {
    const fake = fakeRunner({ squeue: () => ({ stdout: '' }), sbatch: () => ({ exitCode: 1, stderr: 'sbatch: error: Slurm temporarily unable to accept job, sleeping and retrying\nsbatch: error: Batch job submission failed: Resource temporarily unavailable\n' }) });
    const b = new SlurmBackend({ runner: fake.runner, submitRetries: 2, sleep: noSleep });
    const ts = tasks(b, 1);
    await expect(b.submit(ts, () => {})).rejects.toThrow(/gave up after 3 tries/);
    expect(fake.count('sbatch')).toBe(3);
  });

  it('refuses tasks whose run.sh is missing, and duplicates', async () => {
    const b = new SlurmBackend({ runner: fakeRunner({}).runner });
    const t = task(tempDir(), '0000');
    await expect(b.submit([t], () => {})).rejects.toThrow(/run\.sh does not exist/);
    const [w] = tasks(b, 1);
    await expect(b.submit([w, w], () => {})).rejects.toThrow(/appears twice/);
  });

  it('says clearly when the scheduler command is not installed', async () => {
    const b = new SlurmBackend({ runner: fakeRunner({}).runner });
    const ts = tasks(b, 1);
    await expect(b.submit(ts, () => {})).rejects.toThrow(/cannot run squeue/);
  });
});

describe('the other schedulers submit with their own commands', () => {
  it('PBS: qsub, array id 123[].server, subjobs 123[k].server', async () => {
    const fake = fakeRunner({ qselect: () => ({ stdout: '' }), qsub: () => ({ stdout: '123[].pbs01\n' }) });
    const b = new PbsBackend({ runner: fake.runner });
    const got: Submission[] = [];
    await b.submit(tasks(b, 2), (s) => void got.push(s));
    expect(got.map((s) => s.job_id)).toEqual(['123[1].pbs01', '123[2].pbs01']);
    expect(fake.log.find((c) => c.cmd === 'qsub')?.args).toHaveLength(1);
  });
  it('LSF: bsub with the script on standard input, elements 2010[k]', async () => {
    const fake = fakeRunner({ bjobs: () => ({ stdout: 'No unfinished job found\n' }), bsub: () => ({ stdout: 'Job <2010> is submitted to queue <normal>.\n' }) });
    const b = new LsfBackend({ runner: fake.runner });
    const got: Submission[] = [];
    await b.submit(tasks(b, 2), (s) => void got.push(s));
    expect(got.map((s) => s.job_id)).toEqual(['2010[1]', '2010[2]']);
    const bsub = fake.log.find((c) => c.cmd === 'bsub')!;
    expect(bsub.args).toEqual([]);
    expect(bsub.stdinFile).toMatch(/\.arrays\/[0-9a-f]{10}\.sh$/);
  });
  it('Grid Engine: qsub -terse, array id 312.1-2:1, tasks 312.k', async () => {
    const fake = fakeRunner({ qstat: () => ({ stdout: '' }), qsub: () => ({ stdout: '312.1-2:1\n' }) });
    const b = new SgeBackend({ runner: fake.runner });
    const got: Submission[] = [];
    await b.submit(tasks(b, 2), (s) => void got.push(s));
    expect(got.map((s) => s.job_id)).toEqual(['312.1', '312.2']);
    expect(fake.log.find((c) => c.cmd === 'qsub')?.args[0]).toBe('-terse');
  });
});
