/**
 * `ratchet task` as a library call: one task's state, attempts, logs and exit record from a real local
 * run of the invented campaign (test/engine/fixture.ts); following a running task's log to its end;
 * the scheduler's own account command per backend (commands as in sacct(1)/scontrol(1) of Slurm 22.05,
 * qstat(1B) of OpenPBS, bjobs(1) of LSF 10.1, qstat(1)/qacct(1) of Grid Engine 8.1: from their manuals,
 * as the backends cite them).
 */
import { appendFileSync, mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { BufferOutput } from '../../src/engine/output.js';
import { runCampaign } from '../../src/engine/run.js';
import { followTask, formatTask, schedulerAccountCommand, taskReport, TaskViewError } from '../../src/engine/task-view.js';
import { makeCampaign, removeCampaigns } from './fixture.js';

afterAll(removeCampaigns);

describe('taskReport', () => {
  it('shows a failed task: attempts, exit record, the last lines of stderr.log', async () => {
    const { dir, file } = makeCampaign();
    writeFileSync(join(dir, 'fail-label-0001'), '');
    const r = await runCampaign({ campaign: file, stopBefore: 'train', out: new BufferOutput(), error: () => undefined });
    expect(r.exitCode).toBe(1);
    const t = await taskReport(file, 'r0/label/0001', 5);
    expect(t).toMatchObject({ task: 'r0/label/0001', state: 'failed', attempts: [{ n: 1, backend: 'local', state: 'failed', exit_code: 3 }] });
    expect(t.exit?.exit_code).toBe(3);
    expect(t.stderr).toContain('fake label: told to fail');
    expect(t.command).toContain('fake-stage.mjs');
    expect(t.scheduler).toBeUndefined(); // the local backend has no scheduler
    const lines: string[] = [];
    formatTask(t, (l) => lines.push(l));
    expect(lines[0]).toBe('task r0/label/0001: failed');
    expect(lines.join('\n')).toContain('--- last lines of stderr.log');
    await expect(taskReport(file, 'r0/label/0009')).rejects.toThrow(TaskViewError);
    await expect(taskReport(file, 'r0/label')).rejects.toThrow('expected a task like r0/label/0003, found "r0/label"');
    await expect(taskReport(file, 'r0/train/0000')).rejects.toThrow('r0/train has not been planned');
  }, 120_000);
});

describe('followTask', () => {
  it('prints what is appended to the logs and returns the exit record once it appears', async () => {
    const { dir } = makeCampaign();
    const t = join(dir, 'rounds/r0/label/0000');
    mkdirSync(t, { recursive: true });
    writeFileSync(join(t, 'stdout.log'), 'old line\n');
    let seen = '';
    let step = 0;
    const exit = await followTask(t, (s) => (seen += s), {
      intervalMs: 10,
      stopAfterMs: 20_000,
      isOver: () => {
        // The "task" writes a line, then another, then its exit record.
        step++;
        if (step === 2) appendFileSync(join(t, 'stdout.log'), 'step 1\n');
        if (step === 4) appendFileSync(join(t, 'stderr.log'), 'warning\n');
        if (step === 6) writeFileSync(join(t, 'exit.json'), JSON.stringify({ exit_code: 0, start: '2026-01-01T00:00:00Z', end: '2026-01-01T00:00:01Z', host: 'h' }));
        return false;
      },
    });
    expect(exit?.exit_code).toBe(0);
    expect(seen).toBe('step 1\nwarning\n'); // what was there before is not repeated
  });
});

describe('schedulerAccountCommand', () => {
  it('asks each scheduler its own way, and the local backend not at all', () => {
    expect(schedulerAccountCommand('pbs', '123[2].server')).toEqual({ cmd: 'qstat', args: ['-fx', '123[2].server'] });
    expect(schedulerAccountCommand('lsf', '2010[3]')).toEqual({ cmd: 'bjobs', args: ['-l', '2010[3]'] });
    expect(schedulerAccountCommand('slurm', '41_3')?.args.slice(-1)).toEqual(['41_3']);
    expect(schedulerAccountCommand('slurm', '41_3')?.args[1]).toContain('sacct -X -P -j "$1"');
    expect(schedulerAccountCommand('sge', '312.3')?.args.slice(-2)).toEqual(['312', '3']);
    expect(schedulerAccountCommand('local', '1.1')).toBeUndefined();
    expect(schedulerAccountCommand('builtin', 'builtin.1')).toBeUndefined();
  });
});
