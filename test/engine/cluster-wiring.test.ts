/**
 * The engine using the cluster backends' features: the core-hour budget (refusal, --allow-over-budget,
 * core-hours in status), walltime escalation through decide(), and --preflight.
 *
 * Cluster paths run against a FAKE Slurm, as bench/scheduler-calls.ts does: executables `sbatch`,
 * `squeue` and `scancel` put first on PATH, each logging its call. The fake sbatch reports a job killed
 * at its walltime (squeue state TIMEOUT) for scripts asking `--time=01:00:00` while a flag file exists,
 * and otherwise runs the script at once with bash (its EXIT trap writes exit.json), as a node would.
 * Slurm's state name TIMEOUT and the --test-only error text are from sbatch(1)/squeue(1), Slurm 22.05
 * (the same texts the real-cluster suite in test/slurm sees). The real Slurm is not started here.
 */
import { chmodSync, mkdirSync, mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync, existsSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { execa } from 'execa';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { runCampaign, type RunOptions } from '../../src/engine/run.js';
import { BufferOutput } from '../../src/engine/output.js';
import { campaignStatus, formatStatus } from '../../src/engine/status.js';
import { campaignYaml, cliArgs, ledgerEvents, makeCampaign, removeCampaigns } from './fixture.js';

async function run(file: string, extra: Partial<RunOptions> = {}) {
  const out = new BufferOutput();
  const errors: string[] = [];
  const r = await runCampaign({ campaign: file, out, error: (m) => errors.push(m), ...extra });
  return { ...r, text: out.text, errors: errors.join('\n') };
}

const FAKES: Record<string, string> = {
  sbatch: `#!/bin/bash
echo "sbatch $*" >> "$FAKE_DIR/calls"
if [ "$1" = "--test-only" ]; then
  if [ -f "$FAKE_DIR/reject" ]; then echo "sbatch: error: invalid partition specified: nosuchpartition" >&2; echo "sbatch: error: Batch job submission failed: Invalid partition name specified" >&2; exit 1; fi
  echo "sbatch: Job 99 to start at 2026-01-01T00:00:00 using 1 processors on nodes node1 in partition debug" >&2
  exit 0
fi
n=$(( $(cat "$FAKE_DIR/next" 2>/dev/null || echo 100) + 1 )); echo $n > "$FAKE_DIR/next"
script="\${@: -1}"
cp "$script" "$FAKE_DIR/script-$n.sh"
if [ -f "$FAKE_DIR/timeout-first" ] && grep -q -- '--time=01:00:00' "$script"; then
  echo "$n|$n|N/A|TIMEOUT|TimeLimit|0|N/A|fake|" >> "$FAKE_DIR/queue"
else
  bash "$script" >/dev/null 2>&1
  echo "$n|$n|N/A|COMPLETED|None|0|N/A|fake|" >> "$FAKE_DIR/queue"
fi
echo $n
`,
  squeue: `#!/bin/bash
echo "squeue $*" >> "$FAKE_DIR/calls"
case "$*" in *'%F|%j'*) exit 0 ;; esac
[ -f "$FAKE_DIR/queue" ] && cat "$FAKE_DIR/queue"
exit 0
`,
  scancel: `#!/bin/bash
echo "scancel $*" >> "$FAKE_DIR/calls"
`,
};

let fake = '';
const savedPath = process.env.PATH;
const savedFake = process.env.FAKE_DIR;

function resetFake(): void {
  for (const n of readdirSync(fake)) if (n !== 'bin') rmSync(join(fake, n), { force: true });
}
function calls(): string[] {
  const f = join(fake, 'calls');
  return existsSync(f) ? readFileSync(f, 'utf8').trim().split('\n').filter(Boolean) : [];
}

beforeAll(() => {
  fake = mkdtempSync(join(tmpdir(), 'ratchet-fake-slurm-'));
  mkdirSync(join(fake, 'bin'));
  for (const [name, text] of Object.entries(FAKES)) {
    writeFileSync(join(fake, 'bin', name), text);
    chmodSync(join(fake, 'bin', name), 0o755);
  }
  process.env.FAKE_DIR = fake;
  process.env.PATH = `${join(fake, 'bin')}:${savedPath}`;
});

afterAll(() => {
  process.env.PATH = savedPath;
  if (savedFake === undefined) delete process.env.FAKE_DIR;
  else process.env.FAKE_DIR = savedFake;
  rmSync(fake, { recursive: true, force: true });
  removeCampaigns();
});

/** The engine test campaign on the fake Slurm: one job per task (no arrays), a short poll interval. */
function slurmCampaign(extraYaml = ''): { dir: string; file: string } {
  const c = makeCampaign();
  const yaml = campaignYaml({ extraYaml }).replace(/  kind: local\n  jobs: \d+\n/, '  kind: slurm\n  max_array_size: 1\n  poll_interval: 0.05\n  walltime_factor: 2\n');
  expect(yaml).toContain('kind: slurm');
  writeFileSync(c.file, yaml);
  return c;
}

describe('core-hour budget', () => {
  it('refuses a stage over budget (exit 1, budget_refused, nothing submitted), then submits it with --allow-over-budget', async () => {
    // label: 3 tasks x 1 cpu x 1 h (the default walltime) = 3 core-hours, against a budget of 0.5.
    const { dir, file } = makeCampaign({ extraYaml: 'budget:\n  core_hours: 0.5\n' });
    const first = await run(file, { until: 'train' });
    expect(first.exitCode).toBe(1);
    expect(first.errors).toContain('r0/label not submitted');
    expect(first.errors).toContain('may use up to 3.0 core-hours');
    expect(first.errors).toContain('--allow-over-budget');
    let ev = ledgerEvents(dir);
    const refused = ev.find((e) => e.type === 'budget_refused');
    expect(refused).toMatchObject({ round: 0, stage: 'label', estimate: 3 });
    expect(refused!.message).toContain('raise budget.core_hours'.replace('raise', 'Raise'));
    expect(ev.filter((e) => e.type === 'task_submitted' && String(e.task).startsWith('r0/label/'))).toEqual([]);
    expect(existsSync(join(dir, 'rounds/r0/label/0000/runs.log'))).toBe(false);
    expect(ev.at(-1)).toMatchObject({ type: 'run_ended', exit_code: 1 });

    writeFileSync(join(dir, 'sleep-label'), '1'); // each label task takes at least 1 s: a measurable use
    const second = await run(file, { until: 'train', allowOverBudget: true });
    expect(second.errors).toBe('');
    expect(second.exitCode).toBe(0);
    expect(second.text).toContain('r0/label over budget');
    ev = ledgerEvents(dir);
    expect(ev.find((e) => e.type === 'budget_overridden')).toMatchObject({ round: 0, stage: 'label', estimate: 3 });
    expect(ev.find((e) => e.type === 'run_started' && e.allow_over_budget === true)).toBeDefined();
    const subs = ev.filter((e) => e.type === 'task_submitted' && String(e.task).startsWith('r0/label/'));
    expect(subs).toHaveLength(3);
    for (const s of subs) expect(s.resources).toEqual({ walltime_s: 3600, cpus: 1 });

    // Core-hours used, in status (library and CLI JSON), against the exit records read independently:
    // sum over tasks of (end - start) x cpus (the definition in issue 5, "Budget").
    let expected = 0;
    for (const t of ['0000', '0001', '0002']) {
      const x = JSON.parse(readFileSync(join(dir, 'rounds/r0/label', t, 'exit.json'), 'utf8'));
      expected += (Date.parse(x.end) - Date.parse(x.start)) / 3_600_000;
    }
    const st = await campaignStatus(file, () => undefined);
    const ch = st.report!.core_hours;
    expect(expected).toBeGreaterThan(2.5 / 3600);
    expect(ch.by_stage['r0/label']).toBeCloseTo(expected, 5);
    expect(ch.budget).toEqual({ core_hours: 0.5 });
    const text = new BufferOutput();
    formatStatus(st.report!, text);
    expect(text.text).toContain('core-hours used:');
    expect(text.text).toContain('(campaign budget 0.5)');

    const cli = await execa(process.execPath, [...cliArgs(), 'status', file, '--json'], { reject: false });
    expect(cli.exitCode).toBe(0);
    const json = JSON.parse(cli.stdout);
    expect(json.core_hours.by_stage['r0/label']).toBeCloseTo(expected, 5);
    expect(json.core_hours.by_round.r0).toBeGreaterThanOrEqual(json.core_hours.by_stage['r0/label']);
    expect(Object.keys(json.core_hours.by_stage)).toContain('r0/label');
  });
});

describe('cluster paths on a fake Slurm', () => {
  it('resubmits a task killed at its walltime with the walltime doubled, and it then succeeds', async () => {
    resetFake();
    writeFileSync(join(fake, 'timeout-first'), '');
    const { dir, file } = slurmCampaign();
    const r = await run(file, { until: 'train', follow: true });
    expect(r.errors).toBe('');
    expect(r.exitCode).toBe(0);
    expect(r.text).toContain('r0/label/0000 exceeded its walltime 01:00:00; resubmitted with 02:00:00 (x2)');
    const ev = ledgerEvents(dir);
    for (const t of ['0000', '0001', '0002']) {
      const id = `r0/label/${t}`;
      const mine = ev.filter((e) => e.task === id);
      expect(mine.filter((e) => e.type === 'task_ended').map((e) => [e.attempt, e.state])).toEqual([
        [1, 'walltime'],
        [2, 'succeeded'],
      ]);
      expect(mine.find((e) => e.type === 'task_retry')).toMatchObject({ attempt: 2, failure: 'walltime', resources: { walltime_s: 7200 } });
      expect(mine.filter((e) => e.type === 'task_submitted').map((e) => e.resources.walltime_s)).toEqual([3600, 7200]);
    }
    // The scripts the scheduler got: the first asked for 1 h, the resubmission for 2 h (sbatch --time).
    const scripts = readdirSync(fake).filter((n) => n.startsWith('script-')).sort();
    const times = scripts.map((n) => /--time=(\S+)/.exec(readFileSync(join(fake, n), 'utf8'))?.[1]);
    expect(times).toEqual(['01:00:00', '01:00:00', '01:00:00', '02:00:00', '02:00:00', '02:00:00']);
    expect(readFileSync(join(dir, 'rounds/r0/label/0001/run.sh'), 'utf8')).toContain('--time=02:00:00');
    // Each attempt submitted once; r0/label passed its gate.
    expect(calls().filter((c) => c.startsWith('sbatch --parsable'))).toHaveLength(6);
    expect(ev.find((e) => e.type === 'stage_gated' && e.stage === 'label')).toMatchObject({ verdict: 'pass' });
  });

  it('blocks the stage when the walltime already is backend.walltime_max (no resubmission)', async () => {
    resetFake();
    writeFileSync(join(fake, 'timeout-first'), '');
    const { dir, file } = slurmCampaign();
    writeFileSync(file, readFileSync(file, 'utf8').replace('  walltime_factor: 2\n', '  walltime_factor: 2\n  walltime_max: "01:00:00"\n'));
    const r = await run(file, { until: 'train', follow: true });
    expect(r.exitCode).toBe(1);
    expect(r.text).toContain('r0/label is blocked: 3 task(s) failed');
    expect(r.text).toContain('exceeded its walltime 01:00:00, which is already backend.walltime_max (01:00:00)');
    const ev = ledgerEvents(dir);
    expect(ev.filter((e) => e.type === 'task_blocked').map((e) => [e.task, e.failure])).toEqual([
      ['r0/label/0000', 'walltime'],
      ['r0/label/0001', 'walltime'],
      ['r0/label/0002', 'walltime'],
    ]);
    expect(ev.filter((e) => e.type === 'task_retry')).toEqual([]);
    expect(calls().filter((c) => c.startsWith('sbatch --parsable'))).toHaveLength(3);
    const st = await campaignStatus(file, () => undefined);
    expect(st.report!.blocking?.reasons[0]).toContain('already backend.walltime_max');
  });

  it('--preflight: a request the scheduler rejects exits 1, prints the problem, submits nothing', async () => {
    resetFake();
    const { dir, file } = slurmCampaign();
    // The built-in sampling first (on this machine), so the next step is r0/label.
    expect((await run(file, { until: 'label', backend: 'local' })).exitCode).toBe(0);
    writeFileSync(join(fake, 'reject'), '');
    const r = await run(file, { preflight: true });
    expect(r.exitCode).toBe(1);
    // The whole round from r0/label on: 3 label, 2 train, 3 validate, 2 simulate tasks, each checked by the scheduler.
    expect(r.text).toContain('preflight of round 0 (r0/label, r0/train, r0/validate, r0/simulate): 10 task(s), backend slurm, 10 scheduler check(s)');
    expect(r.text).toContain('r0/label: scheduler: slurm rejects the request of r0/label/0000: sbatch: error: invalid partition specified: nosuchpartition');
    expect(r.text).toContain('nothing was submitted');
    const ev = ledgerEvents(dir);
    const pf = ev.find((e) => e.type === 'preflight');
    expect(pf).toMatchObject({ round: 0, stage: 'label', stages: ['label', 'train', 'validate', 'simulate'], backend: 'slurm', tasks: 10, scheduler_checks: 10 });
    expect(pf!.problems).toHaveLength(10);
    // A preflight is not a run: status must not read it as a stopped run.
    expect(ev.filter((e) => e.type === 'run_started').every((e) => e.preflight === undefined)).toBe(true);
    expect(ev.at(-1)!.type).toBe('preflight');
    expect(ev.filter((e) => e.type === 'stage_planned' && e.stage === 'label')).toEqual([]);
    expect(ev.filter((e) => e.type === 'task_submitted' && String(e.task).startsWith('r0/label'))).toEqual([]);
    expect(calls().every((c) => c.startsWith('sbatch --test-only') || c.startsWith('squeue'))).toBe(true);

    rmSync(join(fake, 'reject'));
    const ok = await run(file, { preflight: true });
    expect(ok.exitCode).toBe(0);
    expect(ok.text).toContain('no problems found; nothing was submitted');
    expect(calls().filter((c) => !c.startsWith('sbatch --test-only') && !c.startsWith('squeue'))).toEqual([]);
  });
});
