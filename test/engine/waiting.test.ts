/**
 * Tasks waiting for a free slot are shown as waiting, not running. With `--jobs 1` and a stage of three
 * tasks, the local backend runs one and keeps two in its queue: progress lines and `ratchet status`
 * (text and JSON) must say "1 running, 2 waiting" and never more than one running. The ledger records
 * a task's start ('task_started') when it is first seen running; older ledgers (no such records)
 * still fold, their started tasks counted as running.
 */
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { runCampaign } from '../../src/engine/run.js';
import { BufferOutput } from '../../src/engine/output.js';
import { campaignStatus, formatStatus } from '../../src/engine/status.js';
import { foldEvents, isWaiting, stageRecord, taskPhase } from '../../src/engine/state.js';
import type { LedgerEvent } from '../../src/ledger/journal.js';
import { ledgerEvents, makeCampaign, removeCampaigns } from './fixture.js';

afterAll(removeCampaigns);

let seq = 0;
const ev = (e: Record<string, unknown>): LedgerEvent => ({ seq: ++seq, at: `2026-01-01T00:00:${String(seq).padStart(2, '0')}Z`, type: String(e.type), ...e });

describe('folding task starts', () => {
  it('tells waiting from running only for attempts whose start is recorded', () => {
    const evs = [
      ev({ type: 'stage_planned', round: 0, stage: 'label', tasks: ['0000', '0001', '0002'], inputs: [] }),
      ev({ type: 'task_submitted', task: 'r0/label/0000', attempt: 1, job_id: '1.1', backend: 'local', records_start: true }),
      ev({ type: 'task_submitted', task: 'r0/label/0001', attempt: 1, job_id: '1.2', backend: 'local', records_start: true }),
      // Written by an older ratchet: no records_start, so it cannot tell and counts as running.
      ev({ type: 'task_submitted', task: 'r0/label/0002', attempt: 1, job_id: '1.3', backend: 'local' }),
      ev({ type: 'task_started', task: 'r0/label/0000', attempt: 1 }),
    ];
    const s = foldEvents(evs);
    const t = (n: string) => s.tasks.get(`r0/label/${n}`)!;
    expect(['0000', '0001', '0002'].map((n) => taskPhase(t(n)))).toEqual(['submitted', 'submitted', 'submitted']);
    expect(['0000', '0001', '0002'].map((n) => isWaiting(t(n)))).toEqual([false, true, false]);
    expect(t('0000').attempts[0].started_at).toBe(evs[4].at);
    // A second start of the same attempt keeps the first time; an end leaves nothing waiting.
    const more = foldEvents([
      ...evs,
      ev({ type: 'task_started', task: 'r0/label/0000', attempt: 1 }),
      ev({ type: 'task_ended', task: 'r0/label/0001', attempt: 1, state: 'succeeded' }),
    ]);
    expect(more.tasks.get('r0/label/0000')!.attempts[0].started_at).toBe(evs[4].at);
    expect(isWaiting(more.tasks.get('r0/label/0001')!)).toBe(false);
    // A new attempt waits again until it is seen running.
    const retried = foldEvents([
      ...evs,
      ev({ type: 'task_ended', task: 'r0/label/0000', attempt: 1, state: 'failed' }),
      ev({ type: 'task_retry', task: 'r0/label/0000', attempt: 2, reason: 'attempt 1 failed' }),
      ev({ type: 'task_submitted', task: 'r0/label/0000', attempt: 2, job_id: '1.4', backend: 'local', records_start: true }),
    ]);
    expect(isWaiting(retried.tasks.get('r0/label/0000')!)).toBe(true);
    expect(stageRecord(retried, 0, 'label')!.tasks).toHaveLength(3);
  });
});

describe('--jobs 1 with three tasks', () => {
  it('shows one running and two waiting in progress lines and in status', async () => {
    // 6 starting frames, 2 per label task: 3 label tasks; each sleeps so the others wait their turn.
    const { dir, file } = makeCampaign({ jobs: 1, framesPerTask: 2 });
    writeFileSync(join(dir, 'sleep-label'), '1.5');
    const out = new BufferOutput({ tty: true });
    const running = runCampaign({ campaign: file, out, until: 'r0/train', jobs: 1, error: () => undefined });
    let finished = false;
    void running.then(() => (finished = true));

    // Watch `status` (another reader of the ledger) while the run goes on.
    const seen: { running: number; waiting: number; ended: number }[] = [];
    let text = '';
    let json: unknown;
    while (!finished) {
      const st = await campaignStatus(file, () => undefined);
      const label = st.report?.rounds[0]?.stages.find((s) => s.stage === 'label');
      if (label && label.tasks > 0) {
        const ended = Object.entries(label.counts).filter(([k]) => k !== 'planned' && k !== 'submitted').reduce((n, [, v]) => n + (v ?? 0), 0);
        seen.push({ running: label.running, waiting: label.waiting, ended });
        if (label.running === 1 && label.waiting === 2 && !text) {
          const o = new BufferOutput();
          formatStatus(st.report!, o);
          text = o.text;
          json = JSON.parse(JSON.stringify(st.report));
        }
      }
      await new Promise((r) => setTimeout(r, 50));
    }
    const r = await running;
    expect(r.exitCode).toBe(0);

    // Never more running than --jobs allows; the first task ran while the two others waited.
    expect(seen.length).toBeGreaterThan(0);
    expect(Math.max(...seen.map((s) => s.running))).toBe(1);
    expect(seen).toContainEqual({ running: 1, waiting: 2, ended: 0 });
    for (const s of seen) expect(s.running + s.waiting + s.ended).toBeLessThanOrEqual(3);
    expect(text).toMatch(/now: r0\/label 0\/3 ended, 1 running, 2 waiting/);
    expect(text).toMatch(/r0\s+pass 1\/1\s+running 0\/3/);
    const stage = (json as { rounds: { stages: { stage: string; running: number; waiting: number; counts: Record<string, number> }[] }[] }).rounds[0].stages.find((s) => s.stage === 'label')!;
    expect(stage).toMatchObject({ running: 1, waiting: 2, counts: { submitted: 3 } });

    // Progress lines: one running while the others wait, never two or three running.
    const progress = out.text.split(/\r\x1b\[2K|\n/).filter((l) => l.startsWith('r0/label ['));
    expect(progress.some((l) => l.endsWith('0/3 1 running, 2 waiting'))).toBe(true);
    expect(progress.some((l) => / [23] running/.test(l))).toBe(false);

    // Each label task's start is recorded once, between its submission and its end.
    const events = ledgerEvents(dir);
    for (const id of ['r0/label/0000', 'r0/label/0001', 'r0/label/0002']) {
      const kinds = events.filter((e) => e.task === id).map((e) => e.type);
      expect(kinds.filter((k) => k === 'task_started').length, id).toBeLessThanOrEqual(1);
      const at = (k: string) => kinds.indexOf(k);
      if (kinds.includes('task_started')) {
        expect(at('task_submitted')).toBeLessThan(at('task_started'));
        expect(at('task_started')).toBeLessThan(at('task_ended'));
      }
    }
    // The later tasks waited: their starts come after the first task's end.
    const seqOf = (type: string, task: string) => events.find((e) => e.type === type && e.task === task)?.seq;
    const firstEnd = seqOf('task_ended', 'r0/label/0000')!;
    for (const id of ['r0/label/0001', 'r0/label/0002']) {
      const started = seqOf('task_started', id);
      if (started !== undefined) expect(started).toBeGreaterThan(firstEnd);
    }
  }, 120_000);
});
