/**
 * Whole campaigns run by `ratchet run --backend slurm` against the real one-node Slurm (Debian's
 * Slurm 22.05, test/slurm/cluster.sh), as a user runs them: the CLI in a child process.
 * - the argon demo (reduced as in test/examples/argon-loop.test.ts) to convergence;
 * - `ratchet run` killed with SIGKILL while an array's jobs are queued, twice, then run again: no task
 *   submitted twice, counted in the ledger and in the scheduler's own records;
 * - Ctrl-C (SIGINT) while jobs are queued: polling stops, the jobs stay with the scheduler, the next
 *   run follows them without submitting anything again;
 * - `ratchet run` without --follow, run again and again until the stage is done (as from cron);
 * - a task killed at its walltime, resubmitted with the walltime doubled, and then succeeding.
 * Facts used (seen with Slurm 22.05 on these machines, see issue 5): walltime limits are whole minutes
 * and are enforced 60 to 90 s after the limit, so the walltime campaign starts first, in beforeAll, and
 * runs while the others do; finished jobs stay in `squeue -t all` for MinJobAge (a day in cluster.sh);
 * array elements are addressed ARRAYID_INDEX.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { execa, type ResultPromise } from 'execa';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { campaignYaml, cliArgs, ledgerEvents, makeCampaign, removeCampaigns } from '../engine/fixture.js';
import { writeReducedArgon } from '../examples/argon-reduced.js';
import { ensureSlurm, slurmInstalled } from './cluster.js';

/** A tag unique to this test run: job names of earlier runs stay in `squeue -t all` for a day. */
const TAG = `t${process.pid}${Date.now().toString(36)}`;

interface SchedRecord {
  id: string;
  name: string;
  state: string;
  timeLimit: string;
}

/** Every job of this test run the scheduler knows, array elements one per line (squeue(1): -r, -t all). */
function schedulerRecords(campaign: string): SchedRecord[] {
  const r = spawnSync('squeue', ['-h', '-r', '-t', 'all', '-o', '%i|%j|%T|%l'], { encoding: 'utf8' });
  if (r.status !== 0) throw new Error(`squeue failed: ${r.stderr}`);
  return r.stdout
    .split('\n')
    .filter(Boolean)
    .map((l) => {
      const [id, name, state, timeLimit] = l.split('|');
      return { id: id.trim(), name, state, timeLimit };
    })
    .filter((j) => j.name.startsWith(campaign));
}

function cli(args: string[], env: Record<string, string> = {}): ResultPromise {
  return execa('node', [...cliArgs(), ...args], { reject: false, all: true, env: { ...env, NO_COLOR: '1' } });
}

const submitted = (dir: string) => ledgerEvents(dir).filter((e) => e.type === 'task_submitted' && e.backend !== 'builtin');

/** Fake-stage campaign (test/engine/fixture.ts) on the given backend options. */
function fakeCampaign(name: string, backendExtra: string, edit: (yaml: string) => string = (y) => y, o: Parameters<typeof campaignYaml>[0] = {}) {
  const c = makeCampaign({ name, framesPerTask: 1, ...o, extraYaml: backendExtra });
  writeFileSync(c.file, edit(readFileSync(c.file, 'utf8')));
  return c;
}

async function waitFor(what: string, ok: () => boolean, limitMs = 120_000): Promise<void> {
  const until = Date.now() + limitMs;
  while (!ok()) {
    if (Date.now() > until) throw new Error(`gave up waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 300));
  }
}

if (!slurmInstalled) console.warn('test/slurm: slurmctld is not installed, so the real-Slurm campaign tests are skipped');

describe.skipIf(!slurmInstalled)('campaigns on a real Slurm 22.05', () => {
  const temp: string[] = [];
  let walltime: { dir: string; file: string; name: string; run?: ResultPromise } | undefined;

  beforeAll(() => {
    ensureSlurm();
    // Train task 0000 sleeps past its one-minute walltime the first time it runs, and works the second.
    const name = `wt${TAG}`;
    const slow = `if [ "$(basename "$RATCHET_TASK_DIR")" = 0000 ] && [ ! -e "$RATCHET_CAMPAIGN_DIR/slow-once" ]; then touch "$RATCHET_CAMPAIGN_DIR/slow-once"; sleep 600; fi`;
    const c = fakeCampaign(
      name,
      '  poll_interval: 2\n  walltime_factor: 2\n  walltime_max: "00:10:00"\n',
      (y) => y.replace(/\n {2}train:\n {4}command: (.*)\n {4}attempts: 1\n/, (_m, cmd: string) => `\n  train:\n    command: ${JSON.stringify(`${slow}\n${JSON.parse(cmd)}`)}\n    attempts: 2\n    resources: { walltime: "00:01:00" }\n`),
    );
    expect(readFileSync(c.file, 'utf8')).toContain('walltime: "00:01:00"');
    walltime = { ...c, name, run: cli(['run', c.file, '--backend', 'slurm', '--follow', '--stop-before', 'r0/validate']) };
  }, 180_000);

  afterAll(() => {
    const ids = spawnSync('squeue', ['-h', '-o', '%i|%j'], { encoding: 'utf8' })
      .stdout.split('\n')
      .filter((l) => l.includes(TAG))
      .map((l) => l.split('|')[0]);
    if (ids.length) spawnSync('scancel', ids);
    removeCampaigns();
    for (const d of temp) rmSync(d, { recursive: true, force: true });
  });

  it('runs the demo campaign to convergence with --backend slurm', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'ratchet-slurm-argon-'));
    temp.push(dir);
    const name = `argon${TAG}`;
    const file = writeReducedArgon(dir, { name, backend: '{ kind: local, jobs: 2, poll_interval: 2 }' });
    const r = await cli(['run', file, '--backend', 'slurm', '--follow']);
    expect(r.exitCode, String(r.all)).toBe(0);
    expect(String(r.all)).toMatch(/campaign converged in round \d+/);
    const status = await cli(['status', file, '--json']);
    expect(JSON.parse(String(status.stdout)).ended?.state).toBe('converged');
    // Every task ran as a Slurm job, each exactly once, and Slurm knows each job as completed.
    const subs = submitted(dir);
    expect(subs.length).toBeGreaterThan(10);
    expect(new Set(subs.map((e) => e.backend))).toEqual(new Set(['slurm']));
    expect(new Set(subs.map((e) => `${e.task}#${e.attempt}`)).size).toBe(subs.length);
    const sched = new Map(schedulerRecords(name).map((j) => [j.id, j]));
    for (const e of subs) expect(sched.get(e.job_id)?.state, `${e.task} job ${e.job_id}`).toBe('COMPLETED');
    expect(sched.size).toBe(subs.length);
  }, 600_000);

  it('--preflight on a fresh campaign checks the whole round: a bad partition in the train stage is named, exit 1, nothing queued', async () => {
    const name = `pf${TAG}`;
    const c = fakeCampaign(name, '  poll_interval: 1\n', (y) => y.replace(/(  train:\n)/, '$1    resources:\n      partition: nosuchpartition\n'));
    const r = await cli(['run', c.file, '--backend', 'slurm', '--preflight']);
    expect(r.exitCode, String(r.all)).toBe(1);
    expect(String(r.stdout)).toContain('preflight of round 0 (r0/sample, r0/label, r0/train, r0/validate, r0/simulate)');
    expect(String(r.stdout)).toMatch(/r0\/train: scheduler: slurm rejects the request of .*r0\/train\/0000.*: .*invalid partition/i);
    expect(String(r.stdout)).not.toMatch(/r0\/(label|validate|simulate): scheduler/);
    expect(schedulerRecords(name)).toEqual([]);
    expect(submitted(c.dir)).toEqual([]);
    expect(existsSync(join(c.dir, 'rounds'))).toBe(false);
    const ev = ledgerEvents(c.dir);
    expect(ev.some((e) => e.type === 'run_started')).toBe(false);
    expect(ev.find((e) => e.type === 'preflight')).toMatchObject({ round: 0, stage: 'sample', stages: ['sample', 'label', 'train', 'validate', 'simulate'], tasks: 6 + 2 + 3 + 2 });
  });

  it('never submits a task twice when ratchet run is killed (SIGKILL) while jobs are queued', async () => {
    const name = `kill${TAG}`;
    const c = fakeCampaign(name, '  poll_interval: 1\n  array_throttle: 2\n');
    writeFileSync(join(c.dir, 'sleep-label'), '2');
    const args = ['run', c.file, '--backend', 'slurm', '--follow', '--stop-before', 'r0/validate'];
    // 1: killed right after the second label element's id is recorded (the built-in sampling's is the
    // first task_submitted event): the array's other elements are queued at Slurm, unrecorded.
    const first = await cli(args, { RATCHET_TEST_KILL_AT: 'submitted:3' });
    expect(first.signal, String(first.all)).toBe('SIGKILL');
    const labelTasks = readdirSync(join(c.dir, 'rounds/r0/label')).filter((n) => /^\d{4}$/.test(n));
    expect(labelTasks.length).toBe(6);
    expect(submitted(c.dir)).toHaveLength(2);
    expect(schedulerRecords(name).filter((j) => j.state === 'PENDING' || j.state === 'RUNNING').length).toBeGreaterThan(2);
    // 2: killed after its first poll, with the label jobs queued or running.
    const second = await cli(args, { RATCHET_TEST_KILL_AT: 'running' });
    expect(second.signal, String(second.all)).toBe('SIGKILL');
    // 3: runs to the point asked.
    const third = await cli(args);
    expect(third.exitCode, String(third.all)).toBe(0);

    const subs = submitted(c.dir);
    const byTask = new Map<string, string[]>();
    for (const e of subs) byTask.set(e.task, [...(byTask.get(e.task) ?? []), e.job_id]);
    const label = [...byTask].filter(([t]) => t.startsWith('r0/label/'));
    expect(label).toHaveLength(6);
    expect(label.every(([, ids]) => ids.length === 1)).toBe(true);
    expect(subs.filter((e) => e.adopted).map((e) => e.task).sort()).toEqual(labelTasks.slice(2).map((n) => `r0/label/${n}`));
    expect([...byTask.keys()].filter((t) => t.startsWith('r0/train/'))).toHaveLength(2);
    // The scheduler's side: one array for the label stage (one sbatch), one element per task, and the
    // same job ids as the ledger's; each task's command ran once (fake-stage.mjs appends to runs.log).
    const sched = schedulerRecords(name);
    const labelJobs = sched.filter((j) => j.name.includes('.label.'));
    expect(new Set(labelJobs.map((j) => j.id.split('_')[0])).size).toBe(1);
    expect(labelJobs.map((j) => j.id).sort()).toEqual(label.map(([, ids]) => ids[0]).sort());
    expect(new Set(sched.map((j) => j.id))).toEqual(new Set(subs.map((e) => e.job_id)));
    for (const e of subs) {
      const runs = readFileSync(join(c.dir, 'rounds', e.task, 'runs.log'), 'utf8').trim().split('\n');
      expect(runs, e.task).toHaveLength(1);
    }
  }, 300_000);

  it('Ctrl-C stops polling only: the jobs stay queued at Slurm and the next run follows them', async () => {
    const name = `int${TAG}`;
    const c = fakeCampaign(name, '  poll_interval: 1\n  array_throttle: 1\n');
    writeFileSync(join(c.dir, 'sleep-label'), '4');
    const args = ['run', c.file, '--backend', 'slurm', '--follow', '--stop-before', 'r0/train'];
    const run = cli(args);
    await waitFor('the label jobs to be submitted', () => submitted(c.dir).length === 6);
    run.kill('SIGINT');
    const r = await run;
    expect(r.exitCode, String(r.all)).toBe(130);
    expect(String(r.all)).toMatch(/queued and running jobs stay with the scheduler/);
    // Nothing was cancelled: the tasks not seen to end before the interrupt are still at Slurm.
    const endedBefore = ledgerEvents(c.dir).filter((e) => e.type === 'task_ended' && e.task.startsWith('r0/label/'));
    expect(endedBefore.filter((e) => e.state !== 'succeeded')).toEqual([]);
    const live = schedulerRecords(name).filter((j) => j.state === 'PENDING' || j.state === 'RUNNING');
    expect(live.length).toBeGreaterThan(0);
    expect(live.length).toBeGreaterThanOrEqual(6 - endedBefore.length - 1);
    expect(schedulerRecords(name).filter((j) => j.state === 'CANCELLED')).toEqual([]);
    const again = await cli(args);
    expect(again.exitCode, String(again.all)).toBe(0);
    const subs = submitted(c.dir);
    expect(subs).toHaveLength(6);
    const ended = ledgerEvents(c.dir).filter((e) => e.type === 'task_ended' && e.task.startsWith('r0/label/'));
    expect(ended.map((e) => e.state)).toEqual(Array(6).fill('succeeded'));
    expect(schedulerRecords(name).map((j) => j.state)).toEqual(Array(6).fill('COMPLETED'));
  }, 300_000);

  it('run again and again without --follow (as from cron on a login node) reaches the same end, each task submitted once', async () => {
    const name = `cron${TAG}`;
    const c = fakeCampaign(name, '  poll_interval: 1\n');
    writeFileSync(join(c.dir, 'sleep-label'), '3');
    const outputs: string[] = [];
    for (let k = 0; k < 60; k++) {
      const r = await cli(['run', c.file, '--backend', 'slurm', '--stop-before', 'r0/validate']);
      expect(r.exitCode, String(r.all)).toBe(0);
      outputs.push(String(r.all));
      if (/stopped before r0\/validate/.test(String(r.all))) break;
      expect(String(r.all)).toMatch(/still queued or running; run again/);
      await new Promise((res) => setTimeout(res, 1000));
    }
    expect(outputs.at(-1)).toMatch(/stopped before r0\/validate/);
    expect(outputs.length).toBeGreaterThan(2);
    const subs = submitted(c.dir);
    expect(new Set(subs.map((e) => e.task)).size).toBe(subs.length);
    expect(subs.filter((e) => e.task.startsWith('r0/label/'))).toHaveLength(6);
    expect(subs.filter((e) => e.task.startsWith('r0/train/'))).toHaveLength(2);
    expect(new Set(schedulerRecords(name).map((j) => j.id))).toEqual(new Set(subs.map((e) => e.job_id)));
    const gated = ledgerEvents(c.dir).filter((e) => e.type === 'stage_gated');
    expect(gated.map((e) => [e.stage, e.verdict])).toEqual([
      ['sample', 'pass'],
      ['label', 'pass'],
      ['train', 'pass'],
    ]);
  }, 300_000);

  it('resubmits a task killed at its walltime with the walltime doubled, and it then succeeds', async () => {
    const w = walltime!;
    const r = await w.run!;
    expect(r.exitCode, String(r.all)).toBe(0);
    const ev = ledgerEvents(w.dir).filter((e) => e.task === 'r0/train/0000');
    const ends = ev.filter((e) => e.type === 'task_ended');
    expect(ends.map((e) => [e.attempt, e.state])).toEqual([
      [1, 'walltime'],
      [2, 'succeeded'],
    ]);
    // The script trapped Slurm's SIGTERM at the limit and recorded 128 + 15; the state is Slurm's TIMEOUT.
    expect(ends[0].exit_code).toBe(143);
    expect(ends[0].reason).toMatch(/TIMEOUT/);
    const subs = ev.filter((e) => e.type === 'task_submitted');
    expect(subs.map((e) => e.resources?.walltime_s)).toEqual([60, 120]);
    // Slurm's own record of each attempt: time limits of 1 and 2 minutes (squeue %l).
    const sched = new Map(schedulerRecords(w.name).map((j) => [j.id, j]));
    expect(subs.map((e) => sched.get(e.job_id)?.timeLimit)).toEqual(['1:00', '2:00']);
    expect(subs.map((e) => sched.get(e.job_id)?.state)).toEqual(['TIMEOUT', 'COMPLETED']);
    const gated = ledgerEvents(w.dir).filter((e) => e.type === 'stage_gated' && e.stage === 'train');
    expect(gated.at(-1)?.verdict).toBe('pass');
    expect(existsSync(join(w.dir, 'slow-once'))).toBe(true);
  }, 420_000);
});
