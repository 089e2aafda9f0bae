/**
 * Holds on a real one-node Slurm 22.05 (test/slurm/cluster.sh), through the CLI as a user runs it:
 * - `ratchet stop CAMPAIGN r0/label` while `ratchet run --follow` watches a stage of long-sleeping array
 *   tasks in another process: the running ratchet records the stop, cancels the jobs and ends; squeue
 *   shows none of them queued or running; the next `ratchet run` submits nothing (Slurm's own records
 *   and the ledger count the submissions); after `ratchet retry CAMPAIGN r0/label` they run and pass.
 * - a job cancelled with scancel by the test (a person's cancel): held, shown by status as "cancelled by
 *   a person" with the command that runs it again, not resubmitted by the next run; released by retry.
 * Facts used (Slurm 22.05, seen on these machines): scancel leaves the job in `squeue -t all` as
 * CANCELLED for MinJobAge; array elements are addressed ARRAYID_INDEX.
 */
import { spawnSync } from 'node:child_process';
import { readFileSync, rmSync, writeFileSync } from 'node:fs';
import { userInfo } from 'node:os';
import { join } from 'node:path';
import { execa, type ResultPromise } from 'execa';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { cliArgs, ledgerEvents, makeCampaign, removeCampaigns } from '../engine/fixture.js';
import { ensureSlurm, slurmInstalled } from './cluster.js';

const TAG = `h${process.pid}${Date.now().toString(36)}`;

/** This campaign's jobs as Slurm knows them, array elements one per line (squeue(1): -r, -t all). */
function jobs(campaign: string): { id: string; state: string }[] {
  const r = spawnSync('squeue', ['-h', '-r', '-t', 'all', '-o', '%i|%j|%T'], { encoding: 'utf8' });
  if (r.status !== 0) throw new Error(`squeue failed: ${r.stderr}`);
  return r.stdout
    .split('\n')
    .filter(Boolean)
    .map((l) => l.split('|'))
    .filter(([, name]) => name.startsWith(campaign))
    .map(([id, , state]) => ({ id: id.trim(), state }));
}
const live = (campaign: string) => jobs(campaign).filter((j) => /PENDING|RUNNING|COMPLETING|CONFIGURING/.test(j.state));

function cli(args: string[]): ResultPromise {
  return execa('node', [...cliArgs(), ...args], { reject: false, all: true, env: { NO_COLOR: '1' } });
}

const submitted = (dir: string) => ledgerEvents(dir).filter((e) => e.type === 'task_submitted' && e.backend !== 'builtin');

async function waitFor(what: string, ok: () => boolean, limitMs = 120_000): Promise<void> {
  const until = Date.now() + limitMs;
  while (!ok()) {
    if (Date.now() > until) throw new Error(`gave up waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 300));
  }
}

function campaign(name: string) {
  const c = makeCampaign({ name, framesPerTask: 1, extraYaml: '  poll_interval: 1\n' });
  return c;
}

if (!slurmInstalled) console.warn('test/slurm: slurmctld is not installed, so the real-Slurm stop tests are skipped');

describe.skipIf(!slurmInstalled)('stop and holds on a real Slurm 22.05', () => {
  const names: string[] = [];
  beforeAll(() => ensureSlurm(), 180_000);
  afterAll(() => {
    const ids = names.flatMap((n) => live(n).map((j) => j.id));
    if (ids.length) spawnSync('scancel', ids);
    removeCampaigns();
  });

  it('ratchet stop ends a following run, cancels the array, and nothing runs again until retry', async () => {
    const name = `stop${TAG}`;
    names.push(name);
    const c = campaign(name);
    writeFileSync(join(c.dir, 'sleep-label'), '300');
    const args = ['--backend', 'slurm', '--stop-before', 'r0/train'];
    const run = cli(['run', c.file, '--follow', ...args]);
    await waitFor('the six label jobs to be submitted', () => submitted(c.dir).length === 6);
    await waitFor('Slurm to list them', () => live(name).length === 6);
    const ids = new Set(submitted(c.dir).map((e) => e.job_id));

    const stop = await cli(['stop', c.file, 'r0/label', '--backend', 'slurm', '--reason', 'wrong inputs']);
    expect(stop.exitCode, String(stop.all)).toBe(0);
    expect(String(stop.all)).toMatch(/recorded the stop: 6 task\(s\) held/);
    const r = await run;
    expect(r.exitCode, String(r.all)).toBe(1);
    expect(String(r.all)).toContain('r0/label is held: 6 task(s) stopped or cancelled by a person');
    expect(String(r.all)).toContain(`ratchet retry ${c.file} r0/label`);

    // The scheduler's side: none of the campaign's jobs is queued or running any more.
    await waitFor('the jobs to leave the queue', () => live(name).length === 0, 60_000);
    // (Elements that never started are gone from squeue after the cancel; those that ran stay, CANCELLED.)
    expect(new Set(jobs(name).map((j) => j.state))).toEqual(new Set(['CANCELLED']));
    const ev = ledgerEvents(c.dir);
    const stopped = ev.filter((e) => e.type === 'tasks_stopped');
    expect(stopped).toHaveLength(1);
    expect(stopped[0]).toMatchObject({ scope: 'r0/label', by: userInfo().username, reason: 'wrong inputs', cancelled: 6 });
    expect(ev.filter((e) => e.type === 'task_held' && e.how === 'stop')).toHaveLength(6);

    // The next run submits nothing: the same six jobs at Slurm, the same six submissions in the ledger.
    const again = await cli(['run', c.file, '--follow', ...args]);
    expect(again.exitCode, String(again.all)).toBe(1);
    expect(String(again.all)).toContain('is held');
    expect(submitted(c.dir)).toHaveLength(6);
    expect(live(name)).toEqual([]);
    // Every job Slurm knows for this campaign belongs to an array ratchet recorded (no new submission).
    const arrays = new Set([...ids].map((id) => id.split('_')[0]));
    for (const j of jobs(name)) expect(arrays.has(j.id.split('_')[0]), `job ${j.id} belongs to a recorded array`).toBe(true);

    const status = JSON.parse(String((await cli(['status', c.file, '--json'])).stdout));
    expect(status.held).toHaveLength(6);
    expect(status.blocking).toMatchObject({ stage: 'r0/label', why: 'held' });

    // Released by a person: they run again and the stage passes.
    rmSync(join(c.dir, 'sleep-label'));
    const retry = await cli(['retry', c.file, 'r0/label', '--follow', ...args]);
    expect(retry.exitCode, String(retry.all)).toBe(0);
    expect(String(retry.all)).toContain('released 6 held task(s)');
    const ev2 = ledgerEvents(c.dir);
    expect(ev2.filter((e) => e.type === 'task_released').map((e) => e.by)).toEqual(Array(6).fill(userInfo().username));
    expect(ev2.find((e) => e.type === 'stage_gated' && e.stage === 'label')).toMatchObject({ verdict: 'pass' });
    expect(submitted(c.dir)).toHaveLength(12);
    expect(jobs(name).filter((j) => j.state === 'COMPLETED')).toHaveLength(6);
  }, 420_000);

  it('a job cancelled with scancel is held, shown as cancelled by a person, and not resubmitted', async () => {
    const name = `scan${TAG}`;
    names.push(name);
    const c = campaign(name);
    writeFileSync(join(c.dir, 'sleep-label'), '15');
    const args = ['--backend', 'slurm', '--stop-before', 'r0/train'];
    const first = await cli(['run', c.file, ...args]);
    expect(first.exitCode, String(first.all)).toBe(0);
    expect(String(first.all)).toMatch(/still queued or running/);
    const victim = submitted(c.dir).find((e) => e.task === 'r0/label/0002')!;
    expect(spawnSync('scancel', [victim.job_id]).status).toBe(0);
    // (A waiting element vanishes from squeue when cancelled; one that ran stays as CANCELLED.)
    await waitFor('the cancelled job to leave the queue', () => !live(name).some((j) => j.id === victim.job_id), 60_000);

    const r = await cli(['run', c.file, '--follow', ...args]);
    expect(r.exitCode, String(r.all)).toBe(1);
    expect(String(r.all)).toContain('r0/label is held: 1 task(s)');
    expect(submitted(c.dir)).toHaveLength(6);
    const arrays = new Set(submitted(c.dir).map((e) => e.job_id.split('_')[0]));
    for (const j of jobs(name)) expect(arrays.has(j.id.split('_')[0]), `job ${j.id} belongs to a recorded array`).toBe(true);
    const held = ledgerEvents(c.dir).filter((e) => e.type === 'task_held');
    expect(held).toMatchObject([{ task: 'r0/label/0002', how: 'cancelled' }]);
    const ended = ledgerEvents(c.dir).find((e) => e.type === 'task_ended' && e.task === 'r0/label/0002');
    expect(ended).toMatchObject({ state: 'cancelled', outside: true });

    const status = await cli(['status', c.file]);
    expect(String(status.stdout)).toContain('cancelled by a person');
    expect(String(status.stdout)).toContain(`run it again with: ratchet retry ${c.file} r0/label/0002`);
    const task = await cli(['task', c.file, 'r0/label/0002']);
    expect(task.exitCode, String(task.all)).toBe(0);
    expect(String(task.stdout)).toContain('held (cancelled by a person)');
    expect(String(task.stdout)).toMatch(/the scheduler's own account \((sacct|scontrol)/);

    rmSync(join(c.dir, 'sleep-label'));
    const retry = await cli(['retry', c.file, 'r0/label/0002', '--follow', ...args]);
    expect(retry.exitCode, String(retry.all)).toBe(0);
    expect(submitted(c.dir)).toHaveLength(7);
    expect(ledgerEvents(c.dir).find((e) => e.type === 'stage_gated' && e.stage === 'label')).toMatchObject({ verdict: 'pass' });
    expect(readFileSync(join(c.dir, 'rounds/r0/label/0002/runs.log'), 'utf8').trim().split('\n').length).toBeGreaterThanOrEqual(1);
  }, 420_000);
});
