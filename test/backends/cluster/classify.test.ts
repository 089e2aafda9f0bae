/**
 * Failure classes of scheduler commands and the retry decisions, as pure functions.
 * Transient messages are the ones each scheduler's client prints when its controller is busy or
 * unreachable (common practice; the Slurm ones were seen on Slurm 22.05 clients, the others are the
 * clients' wording as recalled, see TRANSIENT_PATTERNS in classify.ts).
 */
import { describe, expect, it } from 'vitest';
import type { Resources } from '../../../src/backends/backend.js';
import { backoffMs, classifyCommandFailure, decide, describeExitCode, type RetryPolicy } from '../../../src/backends/classify.js';

const out = (stderr: string, over = {}) => ({ exitCode: 1, stdout: '', stderr, timedOut: false, ...over });

describe('classifyCommandFailure', () => {
  it.each([
    ['slurm', 'sbatch: error: Batch job submission failed: Socket timed out on send/recv operation'],
    ['slurm', 'squeue: error: slurm_load_jobs error: Unable to contact slurm controller (connect failure)'],
    ['slurm', 'sbatch: error: Batch job submission failed: Resource temporarily unavailable'],
    ['slurm', 'sbatch: error: Slurm temporarily unable to accept job, sleeping and retrying'],
    ['slurm', 'slurm_load_jobs error: Zero Bytes were transmitted or received'],
    ['pbs', 'qsub: cannot connect to server pbs01 (errno=111)'],
    ['pbs', 'pbs_iff: cannot connect to host'],
    ['pbs', 'qstat: End of File'],
    ['lsf', 'LSF is down. Please wait ...'],
    ['lsf', 'batch system daemon not responding ... still trying'],
    ['sge', 'error: commlib error: got select error (Connection refused)'],
    ['sge', 'unable to contact qmaster using port 6444 on host "master"'],
    ['sge', 'error: failed receiving gdi request response for mid=1 (got syncron message receive timeout error).'],
  ])('%s: "%s" is transient', (_s, msg) => {
    expect(classifyCommandFailure(out(msg)).kind).toBe('transient');
  });
  it.each([
    ['slurm', 'sbatch: error: invalid partition specified: nope'],
    ['slurm', 'sbatch: error: Batch job submission failed: Invalid account or account/partition combination specified'],
    ['slurm', 'sbatch: error: Batch job submission failed: Requested node configuration is not available'],
    ['pbs', 'qsub: Unknown queue'],
    ['lsf', 'gpu: Invalid GPU requirement'],
    ['sge', 'Unable to run job: Job was rejected because job requests unknown queue "nosuchq".'],
  ])('%s: "%s" is permanent, with the message as the reason', (_s, msg) => {
    const c = classifyCommandFailure(out(msg));
    expect(c).toEqual({ kind: 'permanent', reason: msg });
  });
  it('a time-out is transient; a missing command is permanent', () => {
    expect(classifyCommandFailure(out('', { exitCode: null, timedOut: true })).kind).toBe('transient');
    expect(classifyCommandFailure(out('', { exitCode: null, spawnError: 'cannot run sbatch: not found' }))).toEqual({ kind: 'permanent', reason: 'cannot run sbatch: not found' });
  });
});

describe('backoffMs', () => {
  it('doubles from the base, is capped, and adds at most 20 % jitter', () => {
    expect([1, 2, 3, 4].map((r) => backoffMs(r, 1000, 60_000, () => 0))).toEqual([1000, 2000, 4000, 8000]);
    expect(backoffMs(20, 1000, 60_000, () => 0)).toBe(60_000);
    expect(backoffMs(1, 1000, 60_000, () => 1)).toBe(1200);
  });
});

const R: Resources = { cpus: 4, gpus: 0, memory_mb: 2000, walltime_s: 3600 };
const P: RetryPolicy = { attempts: 3, walltimeFactor: 2, walltimeMaxS: 3 * 3600, memoryFactor: 1.5, memoryMaxMb: 4000 };
const H = { failures: 1, walltimes: 1, memoryKills: 1, requeues: 1 };

describe('decide', () => {
  it('walltime: doubles, then stops at walltime_max', () => {
    expect(decide('walltime', R, H, P)).toMatchObject({ action: 'resubmit', changed: { walltime_s: 7200 }, resources: { ...R, walltime_s: 7200 } });
    expect(decide('walltime', { ...R, walltime_s: 7200 }, H, P)).toMatchObject({ action: 'resubmit', changed: { walltime_s: 10800 } });
    expect(decide('walltime', { ...R, walltime_s: 10800 }, H, P)).toMatchObject({ action: 'block', failure: 'walltime', reason: expect.stringMatching(/already backend\.walltime_max \(03:00:00\)/) });
  });
  it('walltime: factor 1 never escalates; no cap escalates at most `attempts` times', () => {
    expect(decide('walltime', R, H, { ...P, walltimeFactor: 1 })).toMatchObject({ action: 'block', reason: expect.stringMatching(/walltime_factor is 1/) });
    const noCap = { ...P, walltimeMaxS: undefined };
    expect(decide('walltime', R, { ...H, walltimes: 3 }, noCap).action).toBe('resubmit');
    expect(decide('walltime', R, { ...H, walltimes: 4 }, noCap).action).toBe('block');
  });
  it('out of memory: more memory up to memory_max; reported when the factor is 1 or no memory was asked for', () => {
    expect(decide('out_of_memory', R, H, P)).toMatchObject({ action: 'resubmit', changed: { memory_mb: 3000 } });
    expect(decide('out_of_memory', { ...R, memory_mb: 3000 }, H, P)).toMatchObject({ action: 'resubmit', changed: { memory_mb: 4000 } });
    expect(decide('out_of_memory', { ...R, memory_mb: 4000 }, H, P).action).toBe('block');
    expect(decide('out_of_memory', R, H, { ...P, memoryFactor: 1 }, 'MemoryError')).toMatchObject({ action: 'block', reason: expect.stringMatching(/memory_factor is 1[\s\S]*MemoryError/) });
    expect(decide('out_of_memory', { ...R, memory_mb: undefined }, H, P)).toMatchObject({ action: 'block', reason: expect.stringMatching(/site's default memory/) });
  });
  it('node failure, preemption, lost, cancelled: resubmitted as they were, up to the requeue limit', () => {
    for (const s of ['node_failure', 'preempted', 'lost', 'cancelled'] as const) {
      expect(decide(s, R, H, P)).toEqual({ action: 'resubmit', failure: s, resources: R, changed: {}, reason: expect.stringMatching(/resubmitted as it was/) });
      expect(decide(s, R, { ...H, requeues: 6 }, P).action).toBe('block');
    }
  });
  it('a failed command runs again up to the stage\'s attempts, then blocks with the last lines of its log', () => {
    expect(decide('failed', R, { ...H, failures: 2 }, P).action).toBe('resubmit');
    const d = decide('failed', R, { ...H, failures: 3 }, P, 'line 1\nValueError: bad input\n');
    expect(d).toEqual({ action: 'block', failure: 'failed', reason: "failed 3 time(s), the stage's attempts (3); last lines of the task's log:\nline 1\nValueError: bad input" });
  });
  it('success is done; queued and running wait', () => {
    expect(decide('succeeded', R, H, P)).toEqual({ action: 'done' });
    expect(decide('queued', R, H, P)).toEqual({ action: 'wait' });
    expect(decide('running', R, H, P)).toEqual({ action: 'wait' });
  });
});

describe('describeExitCode', () => {
  it('names signals as bash reports them (128 + n)', () => {
    expect(describeExitCode(3)).toBe('exit code 3');
    expect(describeExitCode(137)).toBe('exit code 137 (killed by SIGKILL)');
    expect(describeExitCode(143)).toBe('exit code 143 (killed by SIGTERM)');
    expect(describeExitCode(127)).toBe('exit code 127 (command not found)');
  });
});
