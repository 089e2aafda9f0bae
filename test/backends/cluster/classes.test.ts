/**
 * Every failure class for every scheduler, end to end through ClusterBackend.poll: the scheduler's
 * answer is a documented sample (samples/README.md names each source), served by a fake command
 * runner; task folders hold an exit record or none. Then the retry decision for each class.
 * Also: one status call per poll cycle, exit records first, the grace for late exit records.
 */
import { mkdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import type { Resources, Submission, TaskState } from '../../../src/backends/backend.js';
import { decide, type RetryPolicy } from '../../../src/backends/classify.js';
import type { ClusterBackend } from '../../../src/backends/cluster.js';
import { LsfBackend } from '../../../src/backends/lsf.js';
import { PbsBackend } from '../../../src/backends/pbs.js';
import { SgeBackend } from '../../../src/backends/sge.js';
import { SlurmBackend } from '../../../src/backends/slurm.js';
import { fakeRunner, removeTempDirs, tempDir, writeExit, type Handler } from './helpers.js';

afterAll(removeTempDirs);

const SAMPLES = join(import.meta.dirname, 'samples');
const sample = (f: string) => readFileSync(join(SAMPLES, f), 'utf8');

/** One case: a recorded job id, the exit record the task wrote (or none), the state expected. */
type Case = [what: string, jobId: string, exit: number | null, expected: TaskState];

interface Scheduler {
  name: string;
  make: (runner: ReturnType<typeof fakeRunner>['runner']) => ClusterBackend;
  handlers: Record<string, Handler>;
  query: string;
  cases: Case[];
}

const squeue = [...sample('slurm-squeue.txt').trim().split('\n').slice(0, 7), '16|16|4|PENDING|JobArrayTaskLimit|0|N/A|sample-array|', '17|16|5|RUNNING|None|0|NONE|sample-array|', sample('slurm-squeue-composed.txt').trim()].join('\n');

const qacct: Record<string, string> = {
  '15': sample('sge-qacct.txt'), // real: killed at h_rt
  '14': 'jobnumber 14\ntaskid undefined\nfailed 0\nexit_status 3\nru_wallclock 1s\ncategory -l h_rt=600\n',
  '20': 'jobnumber 20\ntaskid undefined\nfailed 37  : qmaster enforced h_rt, h_cpu, or h_vmem limit\nexit_status 137\nru_wallclock 12s\ncategory -l h_rt=600,h_vmem=100M\n',
  '21': 'jobnumber 21\ntaskid undefined\nfailed 19  : before writing exit_status\nexit_status 0\nru_wallclock 0s\n',
  '22': 'jobnumber 22\ntaskid 3\nfailed 25  : rescheduling\nexit_status 0\n',
  '23': 'jobnumber 23\ntaskid undefined\nfailed 17  : through signal\nexit_status 137\n',
};

const SCHEDULERS: Scheduler[] = [
  {
    name: 'slurm',
    make: (runner) => new SlurmBackend({ runner, pollIntervalS: 30, exitGraceS: 0, jobcompFile: undefined }),
    handlers: {
      squeue: () => ({ stdout: `${squeue}\n` }),
      sacct: () => ({ exitCode: 1, stderr: 'sacct: error: Slurm accounting storage is disabled\n' }),
      scontrol: () => ({ stdout: `JobCompLoc              = ${join(SAMPLES, 'slurm-jobcomp.txt')}\nJobCompType             = jobcomp/filetxt\n` }),
    },
    query: 'squeue',
    cases: [
      ['completed', '14', 0, 'succeeded'],
      ['failed with exit code', '15', 3, 'failed'],
      ['walltime', '13', 143, 'walltime'],
      ['out of memory', '31', 137, 'out_of_memory'],
      ['node failure', '32', null, 'node_failure'],
      ['preempted', '30_2', 143, 'preempted'],
      ['cancelled', '18', null, 'cancelled'],
      ['queued', '16_4', null, 'queued'],
      ['running', '16_5', null, 'running'],
      ['failed, from the job completion file', '21', null, 'failed'],
      ['lost', '999', null, 'lost'],
    ],
  },
  {
    name: 'pbs',
    make: (runner) => new PbsBackend({ runner, pollIntervalS: 30, exitGraceS: 0 }),
    handlers: { qstat: () => ({ stdout: sample('pbs-qstat.json') }) },
    query: 'qstat',
    cases: [
      ['completed', '100.pbs01', 0, 'succeeded'],
      ['failed with exit code', '101.pbs01', 3, 'failed'],
      ['walltime', '102.pbs01', 143, 'walltime'],
      ['out of memory', '103.pbs01', null, 'out_of_memory'],
      ['node failure', '104.pbs01', null, 'node_failure'],
      ['preempted', '105.pbs01', 143, 'preempted'],
      ['cancelled', '106.pbs01', 143, 'cancelled'],
      ['queued', '107.pbs01', null, 'queued'],
      ['running', '108[1].pbs01', null, 'running'],
      ['lost', '999.pbs01', null, 'lost'],
    ],
  },
  {
    name: 'lsf',
    make: (runner) => new LsfBackend({ runner, pollIntervalS: 30, exitGraceS: 0 }),
    handlers: { bjobs: () => ({ stdout: sample('lsf-bjobs.txt'), stderr: 'Job <2999> is not found\n', exitCode: 255 }) },
    query: 'bjobs',
    cases: [
      ['completed', '2001', 0, 'succeeded'],
      ['failed with exit code', '2002', 3, 'failed'],
      ['walltime', '2003', 140, 'walltime'],
      ['out of memory', '2004', null, 'out_of_memory'],
      ['node failure', '2005', null, 'node_failure'],
      ['preempted', '2006', 143, 'preempted'],
      ['cancelled', '2007', 130, 'cancelled'],
      ['queued', '2008', null, 'queued'],
      ['running', '2010[1]', null, 'running'],
      ['lost', '2999', null, 'lost'],
    ],
  },
  {
    name: 'sge',
    make: (runner) => new SgeBackend({ runner, pollIntervalS: 30, exitGraceS: 0 }),
    handlers: {
      qstat: () => ({ stdout: sample('sge-qstat.txt') }),
      qacct: (args) => (qacct[args[1]] ? { stdout: `==============================================================\n${qacct[args[1]].replace(/^={5,}\n/, '')}` } : { exitCode: 1, stderr: `error: job id ${args[1]} not found\n` }),
    },
    query: 'qstat',
    cases: [
      ['completed', '300', 0, 'succeeded'],
      ['failed with exit code', '14', 3, 'failed'],
      ['walltime (h_rt, SIGKILL: no exit record)', '15', null, 'walltime'],
      ['out of memory (h_vmem before h_rt)', '20', null, 'out_of_memory'],
      ['node failure', '21', null, 'node_failure'],
      ['preempted (rescheduled)', '22.3', null, 'preempted'],
      ['cancelled', '23', null, 'cancelled'],
      ['queued', '302.3', null, 'queued'],
      ['running', '301', null, 'running'],
      ['lost', '999', null, 'lost'],
    ],
  },
];

const POLICY: RetryPolicy = { attempts: 2, walltimeFactor: 2, walltimeMaxS: 4 * 3600, memoryFactor: 1.5, memoryMaxMb: 8192 };
const RES: Resources = { cpus: 2, gpus: 0, memory_mb: 1000, walltime_s: 3600 };
const HISTORY = { failures: 1, walltimes: 1, memoryKills: 1, requeues: 1 };

const EXPECTED_DECISION: Record<TaskState, (d: ReturnType<typeof decide>) => void> = {
  succeeded: (d) => expect(d).toEqual({ action: 'done' }),
  queued: (d) => expect(d).toEqual({ action: 'wait' }),
  running: (d) => expect(d).toEqual({ action: 'wait' }),
  failed: (d) => expect(d).toMatchObject({ action: 'resubmit', failure: 'failed', changed: {} }),
  walltime: (d) => expect(d).toMatchObject({ action: 'resubmit', failure: 'walltime', changed: { walltime_s: 7200 } }),
  out_of_memory: (d) => expect(d).toMatchObject({ action: 'resubmit', failure: 'out_of_memory', changed: { memory_mb: 1500 } }),
  node_failure: (d) => expect(d).toMatchObject({ action: 'resubmit', failure: 'node_failure', resources: RES, changed: {} }),
  preempted: (d) => expect(d).toMatchObject({ action: 'resubmit', failure: 'preempted', resources: RES, changed: {} }),
  cancelled: (d) => expect(d).toMatchObject({ action: 'resubmit', failure: 'cancelled', resources: RES, changed: {} }),
  lost: (d) => expect(d).toMatchObject({ action: 'resubmit', failure: 'lost', resources: RES, changed: {} }),
};

describe.each(SCHEDULERS)('$name: every class through poll', (s) => {
  const root = tempDir();
  const subs: Submission[] = s.cases.map(([what, jobId, exit], i) => {
    const dir = join(root, `t${i}`);
    mkdirSync(dir, { recursive: true });
    // Exit records written long ago, so no grace applies.
    if (exit !== null) writeExit(dir, exit, '2026-01-01T00:00:00Z', '2026-01-01T00:10:00Z');
    return { id: `r0/label/${what}`, job_id: jobId, dir };
  });

  it('classifies each case with one status call for all of them', async () => {
    const fake = fakeRunner(s.handlers);
    const b = s.make(fake.runner);
    const got = await b.poll(subs);
    expect(Object.fromEntries(got.map((g) => [g.id, g.state]))).toEqual(Object.fromEntries(s.cases.map(([what, , , e]) => [`r0/label/${what}`, e])));
    expect(fake.count(s.query)).toBe(1);
    // The exit record's code survives in the reason of a failure.
    expect(got.find((g) => g.id === 'r0/label/failed with exit code')?.reason).toMatch(/exit code 3/);
  });

  it('decides what to do for each class', async () => {
    const b = s.make(fakeRunner(s.handlers).runner);
    for (const st of await b.poll(subs)) EXPECTED_DECISION[st.state](decide(st.state, RES, HISTORY, POLICY, 'Traceback: boom'));
  });

  it('asks the scheduler nothing when every task has a zero exit record', async () => {
    const fake = fakeRunner(s.handlers);
    const b = s.make(fake.runner);
    const ok = subs.filter((_, i) => s.cases[i][2] === 0);
    expect((await b.poll(ok)).map((x) => x.state)).toEqual(['succeeded']);
    expect(fake.log).toHaveLength(0);
  });
});

describe('poll cycle behaviour (Slurm dialect)', () => {
  const line = (id: string, state: string, end = 'N/A') => `${id}|${id}|N/A|${state}|None|0|${end}|x|`;

  it('reuses the last answer within the poll interval and backs off while nothing changes', async () => {
    let now = 1_000_000;
    const fake = fakeRunner({ squeue: () => ({ stdout: `${line('5', 'RUNNING')}\n` }) });
    const b = new SlurmBackend({ runner: fake.runner, pollIntervalS: 10, now: () => now });
    const dir = tempDir();
    const subs = [{ id: 'r0/label/0', job_id: '5', dir }];
    await b.poll(subs);
    await b.poll(subs);
    expect(fake.count('squeue')).toBe(1); // second poll within the interval: cached
    expect(b.nextPollDelayMs()).toBe(10_000);
    now += 10_000;
    await b.poll(subs);
    expect(fake.count('squeue')).toBe(2);
    expect(b.nextPollDelayMs()).toBe(15_000); // unchanged: x1.5
    now += 15_000;
    await b.poll(subs);
    now += 22_500;
    await b.poll(subs);
    now += 40_000;
    await b.poll(subs);
    expect(b.nextPollDelayMs()).toBe(40_000); // capped at 4x the interval
  });

  it('queries again at once for a job id it has not seen yet', async () => {
    const fake = fakeRunner({ squeue: () => ({ stdout: `${line('5', 'RUNNING')}\n${line('6', 'PENDING')}\n` }) });
    const b = new SlurmBackend({ runner: fake.runner, pollIntervalS: 60 });
    const dir = tempDir();
    await b.poll([{ id: 'a', job_id: '5', dir }]);
    await b.poll([{ id: 'a', job_id: '5', dir }, { id: 'b', job_id: '6', dir: tempDir() }]);
    expect(fake.count('squeue')).toBe(2);
  });

  it('backs off after a scheduler error and reports the tasks as not ended', async () => {
    let now = 0;
    const fake = fakeRunner({ squeue: () => ({ exitCode: 1, stderr: 'slurm_load_jobs error: Socket timed out on send/recv operation\n' }) });
    const b = new SlurmBackend({ runner: fake.runner, pollIntervalS: 5, now: () => now });
    const [st] = await b.poll([{ id: 'a', job_id: '5', dir: tempDir() }]);
    expect(st.state).toBe('queued');
    expect(st.reason).toMatch(/not answering.*Socket timed out/);
    expect(b.nextPollDelayMs()).toBe(10_000);
    now += 10_000;
    await b.poll([{ id: 'a', job_id: '5', dir: tempDir() }]);
    expect(b.nextPollDelayMs()).toBe(20_000);
  });

  it('throws for a permanent status-command error (a misconfigured client)', async () => {
    const fake = fakeRunner({ squeue: () => ({ exitCode: 1, stderr: 'squeue: error: Invalid user: nobody-such\n' }) });
    const b = new SlurmBackend({ runner: fake.runner });
    await expect(b.poll([{ id: 'a', job_id: '5', dir: tempDir() }])).rejects.toThrow(/squeue .*Invalid user/);
  });

  it('waits for the scheduler\'s final state when the exit record is non-zero but the job still runs', async () => {
    const fake = fakeRunner({ squeue: () => ({ stdout: `${line('5', 'COMPLETING')}\n` }) });
    const dir = tempDir();
    const now = Date.now();
    writeExit(dir, 143, new Date(now - 5000).toISOString(), new Date(now - 1000).toISOString());
    const b = new SlurmBackend({ runner: fake.runner, pollIntervalS: 1 });
    const [st] = await b.poll([{ id: 'a', job_id: '5', dir }]);
    expect(st.state).toBe('running');
    expect(st.reason).toMatch(/waiting for the scheduler's final state/);
  });

  it('gives a finished job time for its exit record to appear, then calls it lost', async () => {
    let now = new Date(2026, 11, 1, 23, 0, 10).getTime();
    const fake = fakeRunner({ squeue: () => ({ stdout: `${line('5', 'COMPLETED', '2026-12-01T23:00:00')}\n` }) });
    const b = new SlurmBackend({ runner: fake.runner, pollIntervalS: 0, exitGraceS: 60, now: () => now });
    const sub = [{ id: 'a', job_id: '5', dir: tempDir() }];
    expect((await b.poll(sub))[0].state).toBe('running');
    now += 60_000;
    const [st] = await b.poll(sub);
    expect(st.state).toBe('lost');
    expect(st.reason).toMatch(/COMPLETED but the task wrote no exit record/);
  });

  it('waits the grace before calling a vanished job lost (its records may show up late)', async () => {
    let now = 0;
    const fake = fakeRunner({ squeue: () => ({ stdout: '' }), sacct: () => ({ exitCode: 1, stderr: 'Slurm accounting storage is disabled' }), scontrol: () => ({ stdout: 'JobCompType = jobcomp/none\n' }) });
    const b = new SlurmBackend({ runner: fake.runner, pollIntervalS: 0, exitGraceS: 30, now: () => now });
    const sub = [{ id: 'a', job_id: '88', dir: tempDir() }];
    expect((await b.poll(sub))[0]).toMatchObject({ state: 'running', reason: expect.stringMatching(/no longer lists job 88/) });
    now += 30_000;
    expect((await b.poll(sub))[0].state).toBe('lost');
  });

  it('reports a vanished job that this process cancelled as cancelled, not lost', async () => {
    const fake = fakeRunner({ squeue: () => ({ stdout: '' }), scancel: () => ({}), sacct: () => ({ stdout: '', exitCode: 1, stderr: 'Slurm accounting storage is disabled' }), scontrol: () => ({ stdout: 'JobCompType = jobcomp/none\n' }) });
    const b = new SlurmBackend({ runner: fake.runner });
    const sub = [{ id: 'a', job_id: '77_3', dir: tempDir() }];
    await b.cancel(sub);
    expect(fake.log.find((c) => c.cmd === 'scancel')?.args).toEqual(['77_3']);
    expect((await b.poll(sub))[0].state).toBe('cancelled');
  });

  it('reports a job this process cancelled as cancelled even when its trap recorded 143 (SIGTERM, signal(7))', async () => {
    // Seen with Grid Engine 8.1.9 here: qdel of a running job lets the script's EXIT trap write exit.json.
    const fake = fakeRunner({ squeue: () => ({ stdout: '' }), scancel: () => ({}), sacct: () => ({ stdout: '', exitCode: 1, stderr: 'Slurm accounting storage is disabled' }), scontrol: () => ({ stdout: 'JobCompType = jobcomp/none\n' }) });
    const b = new SlurmBackend({ runner: fake.runner });
    const dir = tempDir();
    const sub = [{ id: 'a', job_id: '78', dir }];
    await b.cancel(sub);
    writeExit(dir, 143, '2026-01-01T00:00:00Z', '2026-01-01T00:00:05Z');
    expect((await b.poll(sub))[0]).toMatchObject({ state: 'cancelled', reason: expect.stringMatching(/^cancelled by ratchet/) });
    // the same record without a cancel by this process is a failure of the command
    const other = new SlurmBackend({ runner: fake.runner });
    expect((await other.poll(sub))[0].state).toBe('failed');
  });
});
