/**
 * --dry-run: the next step's scripts rendered into a plan folder; no process started (the stage
 * programs would append to runs.log and write outputs), nothing written to the ledger, no lock taken.
 */
import { execFileSync } from 'node:child_process';
import { existsSync, readFileSync, readdirSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { runCampaign } from '../../src/engine/run.js';
import { BufferOutput } from '../../src/engine/output.js';
import { listFiles, makeCampaign, removeCampaigns } from './fixture.js';

async function run(file: string, extra: { dryRun?: boolean; until?: string } = {}) {
  const out = new BufferOutput();
  const r = await runCampaign({ campaign: file, out, error: (m) => out.line(`error: ${m}`), ...extra });
  return { ...r, text: out.text };
}

function planFolders(dir: string): string[] {
  const p = join(dir, '.ratchet/plan');
  return existsSync(p) ? readdirSync(p).sort() : [];
}

afterAll(removeCampaigns);

describe('dry run', () => {
  it('on a fresh campaign: plans every stage of round 0, every file it names exists, creates no ledger', async () => {
    const { dir, file } = makeCampaign();
    const r = await run(file, { dryRun: true });
    expect(r.exitCode).toBe(0);
    expect(r.text).toContain('dry run: nothing is executed and nothing is written to the ledger');
    expect(r.text).toContain('r0/sample    ran the built-in sample in the plan folder');
    // 6 start frames x 1 perturbed copy, 2 per task; 2 members; errors + one nve per condition; one run per condition.
    expect(r.text).toContain('r0/label     would plan and run 3 tasks');
    expect(r.text).toContain('r0/train     would plan and run 2 tasks');
    expect(r.text).toContain('r0/validate  would plan and run 3 tasks');
    expect(r.text).toContain('r0/simulate  would plan and run 2 tasks');
    expect(existsSync(join(dir, '.ratchet/ledger.jsonl'))).toBe(false);
    expect(existsSync(join(dir, '.ratchet/lock'))).toBe(false);
    expect(existsSync(join(dir, 'rounds'))).toBe(false);
    // Every file the dry run names was written.
    const named = [...r.text.matchAll(/(\.ratchet\/plan\/\S+\/(?:run\.sh|frames\.xyz))/g)].map((m) => m[1]);
    expect(named.length).toBe(1 + 3 + 2 + 3 + 2);
    for (const f of named) expect(existsSync(join(dir, f)), f).toBe(true);
    const [plan] = planFolders(dir);
    const tj = JSON.parse(readFileSync(join(dir, '.ratchet/plan', plan, 'rounds/r0/sample/0000/task.json'), 'utf8'));
    expect(tj).toMatchObject({ task: 'r0/sample/0000', builtin: true, params: { kind: 'start' } });
    // Scripts of later stages carry the campaign's own paths, as a run renders them.
    const train = readFileSync(join(dir, '.ratchet/plan', plan, 'rounds/r0/train/0001/run.sh'), 'utf8');
    expect(train).toContain(`export RATCHET_IN_TRAINING_SET=${join(dir, 'rounds/r0/label/train.xyz')}`);
    execFileSync('bash', ['-n', join(dir, '.ratchet/plan', plan, 'rounds/r0/simulate/cold/run.sh')]);
  });

  it('respects --stop-before', async () => {
    const { dir, file } = makeCampaign();
    const r = await run(file, { dryRun: true, until: 'r0/sample' });
    expect(r.exitCode).toBe(0);
    expect(r.text).toContain('the campaign stands at r0/sample: --stop-before r0/sample stops before anything runs');
    expect(existsSync(join(dir, '.ratchet/ledger.jsonl'))).toBe(false);
  });

  it('mid-campaign: renders the label scripts, runs nothing, leaves the ledger byte for byte', async () => {
    const { dir, file } = makeCampaign();
    const first = await run(file, { until: 'label' });
    expect(first.exitCode).toBe(0);
    const ledger = readFileSync(join(dir, '.ratchet/ledger.jsonl'));
    const filesBefore = listFiles(dir).filter((f) => !f.startsWith('.ratchet/plan/'));
    const r = await run(file, { dryRun: true });
    expect(r.exitCode).toBe(0);
    expect(r.text).toContain('r0/label     would plan and run 3 tasks');
    expect(r.text).toContain('6 frames in 3 task(s) of up to 2');
    expect(r.text).toContain('fake-stage.mjs label');
    expect(r.text).toMatch(/r0\/label\/0002\s+\.ratchet\/plan\/[^/]+\/rounds\/r0\/label\/0002\/run\.sh/);
    expect(r.text).toContain('r0/simulate  would plan and run 2 tasks');
    expect(readFileSync(join(dir, '.ratchet/ledger.jsonl')).equals(ledger)).toBe(true);
    // Nothing outside the plan folder changed: no task directory, no runs.log, no output.
    expect(listFiles(dir).filter((f) => !f.startsWith('.ratchet/plan/'))).toEqual(filesBefore);
    const plan = join(dir, '.ratchet/plan', planFolders(dir).at(-1)!);
    for (const t of ['0000', '0001', '0002']) {
      const script = join(plan, 'rounds/r0/label', t, 'run.sh');
      execFileSync('bash', ['-n', script]); // syntax check only: throws on a syntax error
      expect(readFileSync(script, 'utf8')).toContain(`export RATCHET_TASK_DIR=${join(dir, 'rounds/r0/label', t)}`);
      expect(existsSync(join(plan, 'rounds/r0/label', t, 'frames.xyz'))).toBe(true);
    }
    // The real run afterwards plans the same tasks with the same scripts.
    const real = await run(file, { until: 'train' });
    expect(real.exitCode).toBe(0);
    for (const t of ['0000', '0001', '0002']) {
      expect(readFileSync(join(dir, 'rounds/r0/label', t, 'run.sh'), 'utf8')).toBe(readFileSync(join(plan, 'rounds/r0/label', t, 'run.sh'), 'utf8'));
      expect(readFileSync(join(dir, 'rounds/r0/label', t, 'frames.xyz'), 'utf8')).toBe(readFileSync(join(plan, 'rounds/r0/label', t, 'frames.xyz'), 'utf8'));
    }
  }, 240_000);
});
