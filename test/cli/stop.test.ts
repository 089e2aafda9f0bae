/**
 * `ratchet stop`, holds and their release on the local backend, through the CLI in child processes as a
 * user runs them: a stop from a second terminal reaches a running `ratchet run` (which stops its task
 * process groups as on Ctrl-C and ends), is recorded with the user name, time, scope and reason, and no
 * later run starts the held tasks until `ratchet retry` releases them. A task killed by a person (SIGTERM
 * to its process group) is held the same way. Also the renamed option (--until -> --stop-before, and
 * --stop-after) and `ratchet task`.
 */
import { spawn } from 'node:child_process';
import { existsSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { userInfo } from 'node:os';
import { join } from 'node:path';
import { execa } from 'execa';
import { afterAll, describe, expect, it } from 'vitest';
import { livePid } from '../../src/backends/local.js';
import { cliArgs, ledgerEvents, makeCampaign, REPO, removeCampaigns } from '../engine/fixture.js';

afterAll(removeCampaigns);

const ratchet = (args: string[]) => execa('node', [...cliArgs(), ...args], { reject: false, all: true, cwd: REPO, env: { NO_COLOR: '1' } });

function background(args: string[]) {
  const child = spawn(process.execPath, [...cliArgs(), ...args], { cwd: REPO, env: { ...process.env, NO_COLOR: '1' } });
  let text = '';
  child.stdout.on('data', (d) => (text += d));
  child.stderr.on('data', (d) => (text += d));
  const exited = new Promise<number | null>((resolve) => child.on('exit', (code) => resolve(code)));
  return { child, exited, text: () => text };
}

async function waitFor(what: string, ok: () => boolean, limitMs = 90_000): Promise<void> {
  const until = Date.now() + limitMs;
  while (!ok()) {
    if (Date.now() > until) throw new Error(`gave up waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 100));
  }
}

const runs = (dir: string, task: string): number =>
  existsSync(join(dir, 'rounds', task, 'runs.log')) ? readFileSync(join(dir, 'rounds', task, 'runs.log'), 'utf8').trim().split('\n').length : 0;
const submitted = (dir: string) => ledgerEvents(dir).filter((e) => e.type === 'task_submitted' && e.backend !== 'builtin');

describe('ratchet stop on the local backend', () => {
  it('reaches a running ratchet run, holds the stage, and nothing restarts until retry releases it', async () => {
    const { dir, file } = makeCampaign();
    writeFileSync(join(dir, 'sleep-label'), '120');
    const run = background(['run', file, '--stop-before', 'train', '--jobs', '2']);
    await waitFor('two label tasks to start', () => runs(dir, 'r0/label/0000') === 1 && runs(dir, 'r0/label/0001') === 1);
    const t0 = Date.now();

    const stop = await ratchet(['stop', file, 'r0/label', '--reason', 'wrong inputs']);
    expect(stop.exitCode, String(stop.all)).toBe(0);
    expect(String(stop.all)).toContain('is running this campaign; asking it to stop');
    expect(String(stop.all)).toContain('recorded the stop: 3 task(s) held');
    const code = await run.exited;
    // The tasks sleep 120 s: the run ended because of the stop, not because they finished.
    expect(Date.now() - t0).toBeLessThan(60_000);
    expect(code, run.text()).toBe(1);
    expect(run.text()).toContain('r0/label is held: 3 task(s) stopped or cancelled by a person');
    expect(run.text()).toContain(`next: when it should go on, release them with: ratchet retry ${file} r0/label`);
    expect(livePid(join(dir, 'rounds/r0/label/0000'))).toBeUndefined();
    expect(livePid(join(dir, 'rounds/r0/label/0001'))).toBeUndefined();

    const ev = ledgerEvents(dir);
    const stopped = ev.find((e) => e.type === 'tasks_stopped')!;
    expect(stopped).toMatchObject({ scope: 'r0/label', by: userInfo().username, reason: 'wrong inputs', cancelled: 3 });
    expect(Date.parse(stopped.requested_at)).toBeGreaterThan(t0 - 1000);
    expect(stopped.tasks.sort()).toEqual(['r0/label/0000', 'r0/label/0001', 'r0/label/0002']);
    const held = ev.filter((e) => e.type === 'task_held');
    expect(held.map((e) => [e.task, e.how, e.by])).toEqual(stopped.tasks.map((t: string) => [t, 'stop', userInfo().username]));
    // The holds are written before the ends of the stopped tasks.
    const firstEnd = ev.findIndex((e) => e.type === 'task_ended' && e.task.startsWith('r0/label/'));
    expect(ev.findIndex((e) => e.type === 'task_held')).toBeLessThan(firstEnd);
    // The queued third task never started.
    expect(runs(dir, 'r0/label/0002')).toBe(0);

    // No later run starts them.
    const again = await ratchet(['run', file, '--stop-before', 'train']);
    expect(again.exitCode, String(again.all)).toBe(1);
    expect(String(again.all)).toContain('is held');
    // (The local backend records all three as submitted at once, the third queued behind the two slots.)
    expect(submitted(dir).filter((e) => e.task.startsWith('r0/label/'))).toHaveLength(3);
    expect([runs(dir, 'r0/label/0000'), runs(dir, 'r0/label/0001'), runs(dir, 'r0/label/0002')]).toEqual([1, 1, 0]);

    const status = await ratchet(['status', file]);
    expect(String(status.stdout)).toMatch(/held 0\/3/);
    expect(String(status.stdout)).toContain(`stopped by ${userInfo().username}`);
    expect(String(status.stdout)).toContain(`run it again with: ratchet retry ${file} r0/label/0002`);
    expect(String(status.stdout)).toContain('blocked: r0/label (held tasks)');
    const task = await ratchet(['task', file, 'r0/label/0000', '--json']);
    const report = JSON.parse(String(task.stdout));
    expect(report).toMatchObject({ task: 'r0/label/0000', state: 'cancelled', held: { how: 'stop', by: userInfo().username } });
    expect(report.exit.exit_code).toBe(143);

    // Released: every task runs (again) and the stage passes; who released them is recorded.
    rmSync(join(dir, 'sleep-label'));
    const retry = await ratchet(['retry', file, 'r0/label', '--stop-before', 'train']);
    expect(retry.exitCode, String(retry.all)).toBe(0);
    expect(String(retry.all)).toContain('released 3 held task(s)');
    const ev2 = ledgerEvents(dir);
    expect(ev2.filter((e) => e.type === 'task_released').map((e) => [e.task, e.by])).toEqual(stopped.tasks.map((t: string) => [t, userInfo().username]));
    expect(ev2.find((e) => e.type === 'stage_gated' && e.stage === 'label')).toMatchObject({ verdict: 'pass' });
    expect([runs(dir, 'r0/label/0000'), runs(dir, 'r0/label/0001'), runs(dir, 'r0/label/0002')]).toEqual([2, 2, 1]);
  }, 240_000);

  it("with no run going: holds the unfinished tasks itself and records it", async () => {
    const { dir, file } = makeCampaign();
    writeFileSync(join(dir, 'fail-label-0001'), '');
    expect((await ratchet(['run', file, '--stop-before', 'train'])).exitCode).toBe(1);
    const stop = await ratchet(['stop', file, '--reason', 'end of allocation']);
    expect(stop.exitCode, String(stop.all)).toBe(0);
    // The failed task is held too (it is not finished); the two that succeeded are not.
    expect(String(stop.all)).toContain('1 task(s) held');
    const ev = ledgerEvents(dir);
    expect(ev.find((e) => e.type === 'tasks_stopped')).toMatchObject({ scope: 'campaign', reason: 'end of allocation', tasks: ['r0/label/0001'], cancelled: 0 });
    expect(existsSync(join(dir, '.ratchet/stop'))).toBe(true);
    expect(existsSync(join(dir, '.ratchet/lock'))).toBe(false);
  }, 120_000);

  it('refuses a target it does not know, with exit code 2 and nothing recorded', async () => {
    const { dir, file } = makeCampaign();
    expect((await ratchet(['run', file, '--stop-before', 'label'])).exitCode).toBe(0);
    const lines = ledgerEvents(dir).length;
    const a = await ratchet(['stop', file, 'r0/train']);
    expect(a.exitCode).toBe(2);
    expect(String(a.stderr)).toContain('r0/train has not been planned, so none of its tasks can be stopped');
    const b = await ratchet(['stop', file, 'r0/sample/0009']);
    expect(b.exitCode).toBe(2);
    expect(String(b.stderr)).toContain('r0/sample/0009 is not a task of r0/sample');
    const c = await ratchet(['stop', file, 'soon']);
    expect(c.exitCode).toBe(2);
    expect(String(c.stderr)).toContain('expected nothing (the whole campaign), a stage like r1/label or a task like r1/label/0003, found "soon"');
    // Nothing unfinished and no run going: nothing to stop, nothing recorded.
    const d = await ratchet(['stop', file]);
    expect(d.exitCode, String(d.all)).toBe(0);
    expect(String(d.stdout)).toContain('nothing to stop (nothing recorded)');
    expect(ledgerEvents(dir).length).toBe(lines);
  }, 120_000);
});

describe('a local task killed by a person', () => {
  it('is held (not restarted) and runs again only after retry', async () => {
    const { dir, file } = makeCampaign();
    writeFileSync(join(dir, 'sleep-label'), '4');
    const run = background(['run', file, '--stop-before', 'train', '--jobs', '3']);
    await waitFor('label task 0001 to start', () => livePid(join(dir, 'rounds/r0/label/0001')) !== undefined && runs(dir, 'r0/label/0001') === 1);
    // A person's kill of the task's process group (as `kill -TERM -<pgid>` would).
    process.kill(-livePid(join(dir, 'rounds/r0/label/0001'))!.pid, 'SIGTERM');
    const code = await run.exited;
    expect(code, run.text()).toBe(1);
    expect(run.text()).toContain('r0/label is held: 1 task(s)');
    const ev = ledgerEvents(dir);
    expect(ev.find((e) => e.type === 'task_ended' && e.task === 'r0/label/0001')).toMatchObject({ state: 'cancelled', outside: true, exit_code: 143 });
    expect(ev.filter((e) => e.type === 'task_held')).toMatchObject([{ task: 'r0/label/0001', how: 'cancelled' }]);
    expect(ev.filter((e) => e.type === 'task_retry')).toEqual([]);
    const status = await ratchet(['status', file]);
    expect(String(status.stdout)).toContain('cancelled by a person');
    rmSync(join(dir, 'sleep-label'));
    const again = await ratchet(['run', file, '--stop-before', 'train']);
    expect(again.exitCode).toBe(1);
    expect(runs(dir, 'r0/label/0001')).toBe(1);
    const retry = await ratchet(['retry', file, 'r0/label/0001', '--stop-before', 'train']);
    expect(retry.exitCode, String(retry.all)).toBe(0);
    expect(runs(dir, 'r0/label/0001')).toBe(2);
  }, 120_000);
});

describe('renamed options and keys', () => {
  it('--until is refused with its new name; --stop-before and --stop-after work', async () => {
    const { dir, file } = makeCampaign();
    const old = await ratchet(['run', file, '--until', 'train']);
    expect(old.exitCode).toBe(2);
    expect(String(old.stderr)).toContain('--until was renamed: use --stop-before POINT');
    const oldRetry = await ratchet(['retry', file, 'r0/label', '--until', 'train']);
    expect(oldRetry.exitCode).toBe(2);
    expect(String(oldRetry.stderr)).toContain('--until was renamed: use --stop-before POINT');
    expect(existsSync(join(dir, '.ratchet/ledger.jsonl'))).toBe(false);
    const both = await ratchet(['run', file, '--stop-before', 'train', '--stop-after', 'label']);
    expect(both.exitCode).toBe(2);
    const bad = await ratchet(['run', file, '--stop-after', 'r1/trian']);
    expect(bad.exitCode).toBe(2);
    expect(String(bad.stderr)).toContain('--stop-after: expected a round (2), a stage of a round (r1/train) or a stage (train), found "r1/trian"');
    // --stop-after r0/sample runs sample (and judges it), then stops before label.
    const after = await ratchet(['run', file, '--stop-after', 'r0/sample']);
    expect(after.exitCode, String(after.all)).toBe(0);
    expect(String(after.stdout)).toContain('stopped before r0/label (--stop-after r0/sample); run again without --stop-after to go on');
    expect(ledgerEvents(dir).filter((e) => e.type === 'stage_gated').map((e) => e.stage)).toEqual(['sample']);
    expect(ledgerEvents(dir).find((e) => e.type === 'run_started')).toMatchObject({ stop_after: 'r0/sample' });
    const before = await ratchet(['run', file, '--stop-before', 'train']);
    expect(String(before.stdout)).toContain('stopped before r0/train (--stop-before the next train stage)');
    expect(ledgerEvents(dir).filter((e) => e.type === 'stage_gated').map((e) => e.stage)).toEqual(['sample', 'label']);
  }, 120_000);

  it('resources.extra_directives is refused with its new name, resources.scheduler_lines', async () => {
    const { file } = makeCampaign();
    const text = readFileSync(file, 'utf8');
    const withKey = (key: string) => text.replace(/\n {2}label:\n/, `\n  label:\n    resources: { ${key}: ["--constraint=avx512"] }\n`);
    writeFileSync(file, withKey('extra_directives'));
    const old = await ratchet(['schema', file]);
    expect(old.exitCode).toBe(2);
    expect(String(old.stderr)).toMatch(/stages\.label\.resources\.extra_directives: 'extra_directives' was renamed: write 'scheduler_lines' instead/);
    expect(String(old.stderr)).toMatch(/campaign\.yaml:\d+/);
    writeFileSync(file, withKey('scheduler_lines'));
    const ok = await ratchet(['schema', file]);
    expect(ok.exitCode, String(ok.all)).toBe(0);
  }, 60_000);
});
