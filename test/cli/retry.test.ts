/** `ratchet retry` as a process: a failed task, the hint `run` prints, the retry, the exit codes. */
import { spawnSync } from 'node:child_process';
import { rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { shellQuote } from '../../src/backends/shell.js';
import { REPO, cliArgs, ledgerEvents, makeCampaign, removeCampaigns } from '../engine/fixture.js';

const ratchet = (args: string[]) =>
  spawnSync(process.execPath, [...cliArgs(), ...args], { cwd: REPO, env: { ...process.env, NO_COLOR: '1' }, encoding: 'utf8', timeout: 120_000 });

afterAll(removeCampaigns);

describe('ratchet retry', () => {
  it('runs a failed task again after run said how', () => {
    const { dir, file } = makeCampaign();
    writeFileSync(join(dir, 'fail-label-0002'), '');
    const first = ratchet(['run', file, '--stop-before', 'train']);
    expect(first.status).toBe(1);
    expect(first.stdout).toContain(`next: look at rounds/r0/label/0002/stderr.log, fix the cause (the command, its inputs or the campaign), then run: ratchet retry ${shellQuote(file)} r0/label/0002`);

    const bad = ratchet(['retry', file, 'r0/label/0000']);
    expect(bad.status).toBe(2);
    expect(bad.stderr).toContain('ratchet: r0/label/0000 succeeded and r0/label is not blocked by its gate; nothing to retry');

    rmSync(join(dir, 'fail-label-0002'));
    const second = ratchet(['retry', file, 'r0/label', '--stop-before', 'train']);
    expect(second.status, second.stderr).toBe(0);
    expect(second.stdout).toContain('retrying 1 task(s): r0/label/0002');
    expect(second.stdout).toContain('stopped before r0/train');
    const attempts = ledgerEvents(dir).filter((e) => e.type === 'task_ended' && e.task === 'r0/label/0002').map((e) => `${e.attempt}:${e.state}`);
    expect(attempts).toEqual(['1:failed', '2:succeeded']);
  }, 240_000);
});
