/**
 * Failures and retries through the engine: a failing task blocks its stage and is run again by
 * `retry` as a numbered attempt; a failing gate blocks and is judged again after a retry; a task with
 * attempts left is run again by itself; a task that exits 0 without its output fails the gate.
 */
import { existsSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { runCampaign } from '../../src/engine/run.js';
import { BufferOutput } from '../../src/engine/output.js';
import { campaignStatus, formatStatus } from '../../src/engine/status.js';
import { ledgerEvents, makeCampaign, campaignYaml, removeCampaigns } from './fixture.js';

async function run(file: string, extra: { retry?: string; until?: string } = {}) {
  const out = new BufferOutput();
  const errors: string[] = [];
  const r = await runCampaign({ campaign: file, out, error: (m) => errors.push(m), ...extra });
  return { ...r, text: out.text, errors: errors.join('\n') };
}

const runs = (dir: string, task: string): number =>
  existsSync(join(dir, 'rounds', task, 'runs.log')) ? readFileSync(join(dir, 'rounds', task, 'runs.log'), 'utf8').trim().split('\n').length : 0;

afterAll(removeCampaigns);

describe('a failing task and its retry', () => {
  it('blocks the stage, says what to do, and runs the task again as attempt 2', async () => {
    const { dir, file } = makeCampaign({ attempts: 1 });
    writeFileSync(join(dir, 'fail-label-0001'), '');
    const first = await run(file, { until: 'train' });
    expect(first.exitCode).toBe(1);
    expect(first.text).toContain('r0/label is blocked: 1 task(s) failed');
    expect(first.text).toContain('r0/label/0001 (attempt 1) failed: exit code 3');
    expect(first.text).toContain('fake label: told to fail'); // the tail of stderr.log
    expect(first.text).toContain(`ratchet retry ${file} r0/label/0001`);
    // The other tasks of the stage ran to the end.
    expect([runs(dir, 'r0/label/0000'), runs(dir, 'r0/label/0001'), runs(dir, 'r0/label/0002')]).toEqual([1, 1, 1]);

    const st = await campaignStatus(file, () => undefined);
    expect(st.report!.blocking).toMatchObject({ stage: 'r0/label', why: 'tasks' });
    const text = new BufferOutput();
    formatStatus(st.report!, text);
    expect(text.text).toMatch(/r0\s+pass 1\/1\s+failed 2\/3/);
    expect(text.text).toContain('ratchet retry');

    // A retry that names something that cannot be retried is bad input, and changes nothing.
    const lines = readFileSync(join(dir, '.ratchet/ledger.jsonl'), 'utf8').split('\n').length;
    const bad = await run(file, { retry: 'r0/label/0000', until: 'train' });
    expect(bad.exitCode).toBe(2);
    expect(bad.errors).toContain('r0/label/0000 succeeded and r0/label is not blocked by its gate');
    const nope = await run(file, { retry: 'r0/label/0009' });
    expect(nope.exitCode).toBe(2);
    expect(nope.errors).toContain('r0/label/0009 is not a task of r0/label (its tasks: 0000, 0001, 0002)');
    // A refused retry records nothing.
    expect(readFileSync(join(dir, '.ratchet/ledger.jsonl'), 'utf8').split('\n').length).toBe(lines);

    rmSync(join(dir, 'fail-label-0001'));
    const second = await run(file, { retry: 'r0/label/0001', until: 'train' });
    expect(second.text).toContain('retrying 1 task(s): r0/label/0001');
    expect(second.text).toContain('stopped before r0/train (--stop-before the next train stage)');
    expect(second.exitCode).toBe(0);
    const ev = ledgerEvents(dir);
    const retry = ev.find((e) => e.type === 'task_retry')!;
    expect(retry).toMatchObject({ task: 'r0/label/0001', attempt: 2, manual: true, archived: 'rounds/r0/label/0001/attempts/1' });
    const ends = ev.filter((e) => e.type === 'task_ended' && e.task === 'r0/label/0001').map((e) => [e.attempt, e.state, e.exit_code]);
    expect(ends).toEqual([
      [1, 'failed', 3],
      [2, 'succeeded', 0],
    ]);
    // The first attempt's records were moved aside; the task ran twice in all, the others once.
    expect(JSON.parse(readFileSync(join(dir, 'rounds/r0/label/0001/attempts/1/exit.json'), 'utf8')).exit_code).toBe(3);
    expect(readFileSync(join(dir, 'rounds/r0/label/0001/attempts/1/stderr.log'), 'utf8')).toContain('told to fail');
    expect([runs(dir, 'r0/label/0000'), runs(dir, 'r0/label/0001'), runs(dir, 'r0/label/0002')]).toEqual([1, 2, 1]);
    expect(ev.filter((e) => e.type === 'stage_gated' && e.stage === 'label').map((e) => e.verdict)).toEqual(['pass']);
  }, 240_000);

  it('runs a task again by itself while it has attempts left', async () => {
    const { dir, file } = makeCampaign({ attempts: 2 });
    writeFileSync(join(dir, 'fail-once-label-0002'), '');
    const r = await run(file, { until: 'train' });
    expect(r.exitCode).toBe(0);
    const ev = ledgerEvents(dir);
    expect(ev.find((e) => e.type === 'task_retry')).toMatchObject({ task: 'r0/label/0002', attempt: 2 });
    expect(ev.find((e) => e.type === 'task_retry')?.manual).toBeUndefined();
    expect(runs(dir, 'r0/label/0002')).toBe(2);
  }, 240_000);
});

describe('a failing gate', () => {
  it('blocks with the reasons, is judged again after a retry, and passes once the cause is fixed', async () => {
    const { dir, file } = makeCampaign({ attempts: 1 });
    writeFileSync(join(dir, 'nan-label-0000'), '');
    const first = await run(file, { until: 'train' });
    expect(first.exitCode).toBe(1);
    expect(first.text).toContain('r0/label is blocked by its gate:');
    // 1 of 6 frames (17%) has a non-finite energy: more than max_rejected_fraction 0.1.
    expect(first.text).toContain('1 of 6 labeled frame(s) rejected');
    expect(first.text).toContain('r0/label/0000 frame 0: non-finite energy NaN');
    expect(first.text).toContain(`then run: ratchet retry ${file} r0/label`);

    // Retrying the stage with no failed task judges it again: same outputs, same verdict.
    const again = await run(file, { retry: 'r0/label', until: 'train' });
    expect(again.text).toContain('r0/label: no failed task; its gate will judge it again');
    expect(again.exitCode).toBe(1);

    // Loosen the limit in the campaign: judged again, it warns and the frame stays out of the data set.
    writeFileSync(file, campaignYaml({ attempts: 1, maxRejected: 0.5 }));
    const loose = await run(file, { retry: 'r0/label', until: 'train' });
    expect(loose.exitCode).toBe(0);
    expect(loose.text).toMatch(/r0\/label\s+warn: labels warn: 1 of 6 labeled frame\(s\) rejected/);
    const check = JSON.parse(readFileSync(join(dir, 'rounds/r0/label/check.json'), 'utf8'));
    expect(check.accepted).toBe(5);
    expect(check.rejected[0]).toMatchObject({ task: 'r0/label/0000', frame: 0, reason: 'non-finite energy NaN' });
    const verdicts = ledgerEvents(dir).filter((e) => e.type === 'stage_gated' && e.stage === 'label').map((e) => e.verdict);
    expect(verdicts).toEqual(['fail', 'fail', 'warn']);
  }, 240_000);

  it('fails when a task exits 0 without writing its output, and a stage retry runs that task again', async () => {
    const { dir, file } = makeCampaign({ attempts: 1 });
    writeFileSync(join(dir, 'skip-train-0001'), '');
    const first = await run(file, { until: 'validate' });
    expect(first.exitCode).toBe(1);
    expect(first.text).toContain('r0/train/0001 ended with exit code 0 but did not write its model (expected rounds/r0/train/0001/model)');
    rmSync(join(dir, 'skip-train-0001'));
    const second = await run(file, { retry: 'r0/train', until: 'validate' });
    expect(second.text).toContain('retrying 1 task(s): r0/train/0001');
    expect(second.exitCode).toBe(0);
    expect(runs(dir, 'r0/train/0000')).toBe(1);
    expect(runs(dir, 'r0/train/0001')).toBe(2);
  }, 240_000);
});
