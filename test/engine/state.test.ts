import { describe, expect, it } from 'vitest';
import type { LedgerEvent } from '../../src/ledger/journal.js';
import { countedFailures, foldEvents, frontier, summarizeStage, taskPhase, stageRecord } from '../../src/engine/state.js';

let seq = 0;
const ev = (e: Record<string, unknown>): LedgerEvent => ({ seq: ++seq, at: '2026-01-01T00:00:00Z', type: String(e.type), ...e });

const planned = (round: number, stage: string, tasks: string[]) => ev({ type: 'stage_planned', round, stage, tasks, inputs: [] });
const submitted = (task: string, attempt = 1) => ev({ type: 'task_submitted', task, attempt, job_id: `j${seq}`, backend: 'local' });
const ended = (task: string, state: string, attempt = 1) => ev({ type: 'task_ended', task, attempt, state });
const gated = (round: number, stage: string, verdict: string) => ev({ type: 'stage_gated', round, stage, verdict, reasons: [], gates: [] });

describe('folding the ledger into the campaign state', () => {
  it('follows a stage from planned to passed', () => {
    const evs = [planned(0, 'sample', ['0000'])];
    let s = foldEvents(evs);
    expect(summarizeStage(stageRecord(s, 0, 'sample')).phase).toBe('ready');
    evs.push(submitted('r0/sample/0000'));
    s = foldEvents(evs);
    expect(taskPhase(s.tasks.get('r0/sample/0000')!)).toBe('submitted');
    expect(summarizeStage(stageRecord(s, 0, 'sample')).phase).toBe('running');
    evs.push(ended('r0/sample/0000', 'succeeded'));
    s = foldEvents(evs);
    expect(summarizeStage(stageRecord(s, 0, 'sample')).phase).toBe('collect');
    evs.push(gated(0, 'sample', 'warn'));
    s = foldEvents(evs);
    expect(summarizeStage(stageRecord(s, 0, 'sample')).phase).toBe('passed');
    expect(frontier(s)).toEqual({ round: 0, stage: 'label' });
  });

  it('blocks on a failed gate until a retry clears the verdict', () => {
    const evs = [planned(0, 'sample', []), gated(0, 'sample', 'pass')];
    evs.push(planned(0, 'label', ['0000', '0001']), submitted('r0/label/0000'), submitted('r0/label/0001'));
    evs.push(ended('r0/label/0000', 'succeeded'), ended('r0/label/0001', 'succeeded'), gated(0, 'label', 'fail'));
    let s = foldEvents(evs);
    expect(summarizeStage(stageRecord(s, 0, 'label')).phase).toBe('blocked');
    expect(frontier(s)).toEqual({ round: 0, stage: 'label' });
    evs.push(ev({ type: 'task_retry', task: 'r0/label/0001', attempt: 2, reason: 'retry requested', manual: true }));
    s = foldEvents(evs);
    const sum = summarizeStage(stageRecord(s, 0, 'label'));
    expect(sum.phase).toBe('ready');
    expect(sum.toStart.map((t) => t.id)).toEqual(['r0/label/0001']);
    expect(s.tasks.get('r0/label/0001')!.attempts.map((a) => a.n)).toEqual([1, 2]);
    // Judging again: the verdict is cleared without a new attempt.
    const again = foldEvents([...evs.slice(0, 8), ev({ type: 'stage_regate', round: 0, stage: 'label' })]);
    expect(summarizeStage(stageRecord(again, 0, 'label')).phase).toBe('collect');
  });

  it('starts a failed task again only while it has attempts left', () => {
    const evs = [planned(0, 'train', ['0000']), submitted('r0/train/0000'), ended('r0/train/0000', 'failed')];
    let s = foldEvents(evs);
    const st = () => stageRecord(s, 0, 'train');
    expect(summarizeStage(st(), { attempts: 1 }).phase).toBe('failed');
    expect(summarizeStage(st(), { attempts: 2 }).phase).toBe('ready');
    evs.push(ev({ type: 'task_retry', task: 'r0/train/0000', attempt: 2, reason: 'attempt 1 failed' }));
    evs.push(submitted('r0/train/0000', 2), ended('r0/train/0000', 'walltime', 2));
    s = foldEvents(evs);
    expect(countedFailures(s.tasks.get('r0/train/0000')!)).toBe(2);
    expect(summarizeStage(st(), { attempts: 2 }).phase).toBe('failed');
    // A manual retry starts the count again.
    evs.push(ev({ type: 'task_retry', task: 'r0/train/0000', attempt: 3, reason: 'retry requested', manual: true }));
    evs.push(submitted('r0/train/0000', 3), ended('r0/train/0000', 'failed', 3));
    s = foldEvents(evs);
    expect(countedFailures(s.tasks.get('r0/train/0000')!)).toBe(1);
    expect(summarizeStage(st(), { attempts: 2 }).phase).toBe('ready');
  });

  it('starts a cancelled or lost task again once per process', () => {
    const evs = [planned(0, 'simulate', ['cold', 'warm']), submitted('r0/simulate/cold'), submitted('r0/simulate/warm')];
    evs.push(ended('r0/simulate/cold', 'cancelled'), ended('r0/simulate/warm', 'lost'));
    const s = foldEvents(evs);
    const st = stageRecord(s, 0, 'simulate');
    expect(summarizeStage(st).toStart.map((t) => t.name)).toEqual(['cold', 'warm']);
    const again = summarizeStage(st, { restarted: new Set(['r0/simulate/warm']) });
    expect(again.toStart.map((t) => t.name)).toEqual(['cold']);
    expect(again.failed.map((t) => t.name)).toEqual(['warm']);
  });

  it('keeps the latest artifact per path and ignores unknown events', () => {
    const a = (id: string, path: string) => ev({ type: 'artifact', id, path, role: 'model', inputs: [], campaign_sha256: 'x', tool_version: '0' });
    const s = foldEvents([a('sha256:1', 'm'), ev({ type: 'something_new', x: 1 }), a('sha256:2', 'm'), a('sha256:1', 'n')]);
    expect(s.byPath.get('m')!.id).toBe('sha256:2');
    expect(s.byPath.size).toBe(2);
    expect(s.events).toBe(4);
  });

  it('ends and resumes a campaign', () => {
    const evs = [ev({ type: 'campaign_ended', state: 'exhausted', round: 2, reasons: [], holding: ['hot'] })];
    expect(foldEvents(evs).ended?.state).toBe('exhausted');
    expect(foldEvents(evs).judged.has(2)).toBe(true);
    evs.push(ev({ type: 'campaign_resumed', reason: 'rounds.max is now 5' }));
    expect(foldEvents(evs).ended).toBeUndefined();
  });
});
