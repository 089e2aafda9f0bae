/**
 * `ratchet run` as a process: exit codes, the dry run, and Ctrl-C (SIGINT): running tasks are stopped,
 * recorded as cancelled, the run ends with 130, and the next run starts them again.
 */
import { spawn, spawnSync } from 'node:child_process';
import { existsSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { livePid } from '../../src/backends/local.js';
import { REPO, cliArgs, ledgerEvents, makeCampaign, removeCampaigns } from '../engine/fixture.js';

const ratchet = (args: string[]) =>
  spawnSync(process.execPath, [...cliArgs(), ...args], { cwd: REPO, env: { ...process.env, NO_COLOR: '1' }, encoding: 'utf8', timeout: 120_000 });

afterAll(removeCampaigns);

describe('ratchet run', () => {
  it('exit 2 for a bad campaign, with the file named, and no ledger', () => {
    const { dir, file } = makeCampaign({ extraYaml: 'stagez: {}\n' });
    const r = ratchet(['run', file]);
    expect(r.status).toBe(2);
    expect(r.stderr).toMatch(/^ratchet: .*campaign\.yaml:\d+:\d+: stagez: /m);
    expect(existsSync(join(dir, '.ratchet'))).toBe(false);
  });

  it('--dry-run prints the plan and writes no ledger', () => {
    const { dir, file } = makeCampaign();
    const r = ratchet(['run', file, '--dry-run']);
    expect(r.status).toBe(0);
    expect(r.stdout).toContain('r0/sample    ran the built-in sample in the plan folder');
    expect(r.stdout).toContain('r0/simulate  would plan and run 2 tasks');
    expect(existsSync(join(dir, '.ratchet/ledger.jsonl'))).toBe(false);
  });

  it('Ctrl-C stops the tasks, records them as cancelled, exits 130; the next run goes on', async () => {
    const { dir, file } = makeCampaign();
    writeFileSync(join(dir, 'sleep-label'), '60');
    const child = spawn(process.execPath, [...cliArgs(), 'run', file, '--stop-before', 'train'], { cwd: REPO, env: { ...process.env, NO_COLOR: '1' } });
    let stdout = '';
    child.stdout.on('data', (d) => (stdout += d));
    const exited = new Promise<number | null>((resolve) => child.on('exit', (code) => resolve(code)));
    // Wait until both label tasks that fit in two slots are running.
    const deadline = Date.now() + 90_000;
    while (!(existsSync(join(dir, 'rounds/r0/label/0000/runs.log')) && existsSync(join(dir, 'rounds/r0/label/0001/runs.log')))) {
      if (Date.now() > deadline) throw new Error(`label tasks did not start:\n${stdout}`);
      await new Promise((r) => setTimeout(r, 100));
    }
    child.kill('SIGINT');
    const code = await exited;
    expect(stdout).toContain('SIGINT received: stopping tasks');
    expect(code).toBe(130);
    expect(stdout).toContain('interrupted by SIGINT');
    const ev = ledgerEvents(dir);
    expect(ev.at(-1)).toMatchObject({ type: 'run_ended', outcome: 'interrupted', exit_code: 130, signal: 'SIGINT' });
    const cancelled = ev.filter((e) => e.type === 'task_ended' && e.state === 'cancelled').map((e) => e.task).sort();
    // Two were running; the third was queued behind them (two at once) and never started.
    expect(cancelled).toEqual(['r0/label/0000', 'r0/label/0001', 'r0/label/0002']);
    expect(existsSync(join(dir, 'rounds/r0/label/0002/runs.log'))).toBe(false);
    // Every started attempt has its end recorded and no task process is left.
    const started = ev.filter((e) => e.type === 'task_submitted').map((e) => `${e.task}#${e.attempt}`);
    const ended = ev.filter((e) => e.type === 'task_ended').map((e) => `${e.task}#${e.attempt}`);
    expect(ended.sort()).toEqual(started.sort());
    expect(livePid(join(dir, 'rounds/r0/label/0000'))).toBeUndefined();
    expect(livePid(join(dir, 'rounds/r0/label/0001'))).toBeUndefined();
    expect(existsSync(join(dir, '.ratchet/lock'))).toBe(false);

    rmSync(join(dir, 'sleep-label'));
    const again = ratchet(['run', file, '--stop-before', 'train']);
    expect(again.status, again.stderr).toBe(0);
    const ev2 = ledgerEvents(dir);
    expect(ev2.filter((e) => e.type === 'task_retry').map((e) => [e.task, e.attempt]).sort()).toEqual([
      ['r0/label/0000', 2],
      ['r0/label/0001', 2],
      ['r0/label/0002', 2],
    ]);
    expect(ev2.find((e) => e.type === 'stage_gated' && e.stage === 'label')).toMatchObject({ verdict: 'pass' });
    expect(readFileSync(join(dir, 'rounds/r0/label/0000/attempts/1/exit.json'), 'utf8')).toContain('"exit_code":143');
  }, 240_000);
});
