/**
 * Holds in the folded state (pure): a 'task_held' keeps a task from being started again whatever its
 * end, blocks its stage, and 'task_released' lets it go; an outside cancel gets its hold in the same
 * write; stop scopes; --stop-after points. Invented ledgers, checked against the rules in
 * docs/running.md (no outside source: these are ratchet's own rules).
 */
import { describe, expect, it } from 'vitest';
import type { LedgerEvent } from '../../src/ledger/journal.js';
import { nextPoint, parseUntil, untilPoint } from '../../src/engine/ids.js';
import { foldEvents, stageRecord, summarizeStage } from '../../src/engine/state.js';
import { normalScope, StopError, stopTargets, withOutsideHolds } from '../../src/engine/stop.js';
import type { TaskEndedEvent } from '../../src/engine/events.js';

let seq = 0;
const ev = (e: Record<string, unknown>): LedgerEvent => ({ seq: ++seq, at: `2026-12-02T10:00:${String(seq).padStart(2, '0')}Z`, ...e }) as LedgerEvent;

function ledger(extra: Record<string, unknown>[]) {
  return foldEvents([
    ev({ type: 'stage_planned', round: 0, stage: 'label', tasks: ['0000', '0001', '0002'], inputs: [] }),
    ev({ type: 'task_submitted', task: 'r0/label/0000', attempt: 1, job_id: '7_1', backend: 'slurm' }),
    ev({ type: 'task_submitted', task: 'r0/label/0001', attempt: 1, job_id: '7_2', backend: 'slurm' }),
    ev({ type: 'task_ended', task: 'r0/label/0000', attempt: 1, state: 'succeeded', exit_code: 0 }),
    ...extra.map(ev),
  ]);
}

describe('holds in the state', () => {
  it('a cancelled task without a hold is started again by itself; with a hold it blocks the stage', () => {
    const ended = { type: 'task_ended', task: 'r0/label/0001', attempt: 1, state: 'cancelled' };
    const free = summarizeStage(stageRecord(ledger([ended]), 0, 'label'));
    expect(free.toStart.map((t) => t.id)).toEqual(['r0/label/0001', 'r0/label/0002']);
    const s = ledger([ended, { type: 'task_held', task: 'r0/label/0001', attempt: 1, how: 'cancelled', reason: 'cancelled by a person outside ratchet' }]);
    const sum = summarizeStage(stageRecord(s, 0, 'label'));
    expect(sum.held.map((t) => t.id)).toEqual(['r0/label/0001']);
    expect(sum.toStart.map((t) => t.id)).toEqual(['r0/label/0002']);
    expect(sum.phase).toBe('ready');
    // A held task that never started is held too, and with nothing else to do the stage is 'held'.
    const all = ledger([ended, { type: 'task_held', task: 'r0/label/0001', attempt: 1, how: 'stop', by: 'ana', reason: 'x' }, { type: 'task_held', task: 'r0/label/0002', attempt: 1, how: 'stop', by: 'ana', reason: 'x' }]);
    const sum2 = summarizeStage(stageRecord(all, 0, 'label'));
    expect(sum2.phase).toBe('held');
    expect(sum2.toStart).toEqual([]);
    expect(all.tasks.get('r0/label/0002')!.held).toMatchObject({ how: 'stop', by: 'ana' });
    // Released: started again.
    const rel = ledger([ended, { type: 'task_held', task: 'r0/label/0001', attempt: 1, how: 'stop', by: 'ana', reason: 'x' }, { type: 'task_released', task: 'r0/label/0001', by: 'ana', host: 'h' }]);
    expect(summarizeStage(stageRecord(rel, 0, 'label')).toStart.map((t) => t.id)).toEqual(['r0/label/0001', 'r0/label/0002']);
  });

  it('a held task still queued or running counts as running until its end is seen', () => {
    const s = ledger([{ type: 'task_held', task: 'r0/label/0001', attempt: 1, how: 'stop', by: 'ana', reason: 'x' }]);
    const sum = summarizeStage(stageRecord(s, 0, 'label'));
    expect(sum.running.map((t) => t.id)).toEqual(['r0/label/0001']);
    expect(sum.phase).toBe('ready'); // 0002 is still to start (it is not in the stop's scope here)
  });

  it('adds a hold after an outside cancel, once, and none after ratchet\'s own cancel or another end', () => {
    const s = ledger([]);
    const e = (task: string, state: TaskEndedEvent['state'], outside?: true): TaskEndedEvent => ({ type: 'task_ended', task, attempt: 1, state, ...(outside ? { outside } : {}), reason: 'Slurm: CANCELLED' });
    const out = withOutsideHolds(s, [e('r0/label/0001', 'cancelled', true), e('r0/label/0002', 'cancelled'), e('r0/label/0000', 'preempted')]);
    expect(out.map((x) => [x.type, x.task])).toEqual([
      ['task_ended', 'r0/label/0001'],
      ['task_ended', 'r0/label/0002'],
      ['task_ended', 'r0/label/0000'],
      ['task_held', 'r0/label/0001'],
    ]);
    expect(out[3]).toMatchObject({ how: 'cancelled', reason: 'cancelled by a person outside ratchet (Slurm: CANCELLED)' });
    const already = ledger([{ type: 'task_held', task: 'r0/label/0001', attempt: 1, how: 'stop', by: 'ana', reason: 'x' }]);
    expect(withOutsideHolds(already, [e('r0/label/0001', 'cancelled', true)])).toHaveLength(1);
  });
});

describe('stop scopes', () => {
  it('names the campaign, a stage or a task, and refuses anything else with the form expected', () => {
    expect(normalScope(undefined)).toBe('campaign');
    expect(normalScope('1/label')).toBe('r1/label');
    expect(normalScope('r0/label/0003')).toBe('r0/label/0003');
    expect(() => normalScope('label')).toThrow(StopError);
    const s = ledger([]);
    // Unfinished tasks only: 0000 succeeded.
    expect(stopTargets(s, 'campaign').map((t) => t.id)).toEqual(['r0/label/0001', 'r0/label/0002']);
    expect(stopTargets(s, 'r0/label/0001').map((t) => t.id)).toEqual(['r0/label/0001']);
    expect(() => stopTargets(s, 'r0/train')).toThrow('r0/train has not been planned');
    expect(() => stopTargets(s, 'r0/label/0007')).toThrow('r0/label/0007 is not a task of r0/label');
  });
});

describe('--stop-after points', () => {
  it('stops before the point that follows the one named', () => {
    const now = { round: 0, stage: 'label' as const };
    expect(untilPoint({ ...parseUntil('r0/label')!, after: true }, now)).toEqual({ round: 0, stage: 'train' });
    expect(untilPoint({ ...parseUntil('r1/simulate')!, after: true }, now)).toEqual({ round: 2, stage: 'sample' });
    expect(untilPoint({ ...parseUntil('1')!, after: true }, now)).toEqual({ round: 2, stage: 'sample' });
    // A bare stage: its next occurrence at or after now, then the point after it.
    expect(untilPoint({ ...parseUntil('train')!, after: true }, { round: 0, stage: 'validate' })).toEqual({ round: 1, stage: 'validate' });
    expect(untilPoint({ ...parseUntil('simulate')!, after: true }, { round: 0, stage: 'sample' })).toEqual({ round: 1, stage: 'sample' });
    expect(nextPoint({ round: 3, stage: 'simulate' })).toEqual({ round: 4, stage: 'sample' });
    // --stop-before is unchanged.
    expect(untilPoint(parseUntil('r0/label')!, now)).toEqual({ round: 0, stage: 'label' });
  });
});
