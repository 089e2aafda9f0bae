/**
 * Core-hour budget arithmetic. Check values are worked by hand: a core-hour is one core for one hour
 * (common practice in allocation accounting), so 200 tasks x 2 cpus x 0.5 h = 200 core-hours.
 */
import { describe, expect, it } from 'vitest';
import { attemptCoreHours, checkBudget, estimateCoreHours, estimateTasksCoreHours, summarizeUsage } from '../../../src/backends/budget.js';

describe('estimates', () => {
  it('tasks x cpus x walltime in hours', () => {
    expect(estimateCoreHours(200, 2, 1800)).toBe(200);
    expect(estimateCoreHours(4, 8, 3600 * 12)).toBe(384);
    expect(estimateTasksCoreHours([{ resources: { cpus: 2, walltime_s: 3600 } }, { resources: { cpus: 2, walltime_s: 7200 } }])).toBe(6);
    expect(() => estimateCoreHours(-1, 1, 1)).toThrow(/expected numbers >= 0/);
  });
});

describe('checkBudget', () => {
  const base = { label: 'r1/label', estimate: 200, spentCampaign: 700, spentRound: 50, budget: { core_hours: 1000, core_hours_per_round: 300 } };
  it('allows a stage that fits both caps and says what is left', () => {
    const c = checkBudget(base);
    expect(c).toMatchObject({ ok: true, over: false });
    expect(c.message).toBe('campaign budget: 100.0 of 1000.0 core-hours left after r1/label (estimate 200.0); round budget: 50.0 of 300.0 core-hours left after r1/label (estimate 200.0)');
  });
  it('refuses a stage over the campaign cap, counting tasks still running', () => {
    const c = checkBudget({ ...base, committedCampaign: 150 });
    expect(c.ok).toBe(false);
    expect(c.message).toMatch(/^r1\/label may use up to 200\.0 core-hours, but the campaign budget has 150\.0 of 1000\.0 left \(700\.0 used, 150\.0 held by tasks still queued or running\)\. Raise budget/);
    expect(c.message).toMatch(/--allow-over-budget/);
  });
  it('refuses a stage over the round cap', () => {
    const c = checkBudget({ ...base, spentRound: 150 });
    expect(c).toMatchObject({ ok: false, over: true });
    expect(c.message).toMatch(/round budget has 150\.0 of 300\.0 left/);
  });
  it('--allow-over-budget lets it through and says so', () => {
    const c = checkBudget({ ...base, spentRound: 150, allowOver: true });
    expect(c).toMatchObject({ ok: true, over: true });
    expect(c.message).toMatch(/submitting anyway \(--allow-over-budget\)$/);
  });
  it('no caps: always allowed', () => {
    expect(checkBudget({ ...base, budget: {} })).toEqual({ ok: true, over: false, message: 'no budget set; r1/label may use up to 200.0 core-hours' });
  });
});

describe('actual use from exit records', () => {
  it('(end - start) x cpus per attempt, summed per task, stage and round', () => {
    const s = summarizeUsage([
      { task: 'r0/label/0000', round: 0, stage: 'label', cpus: 2, exit: { start: '2026-01-01T00:00:00Z', end: '2026-01-01T00:30:00Z' } },
      { task: 'r0/label/0001', round: 0, stage: 'label', cpus: 2, exit: { start: '2026-01-01T00:00:00Z', end: '2026-01-01T01:30:00Z' } },
      { task: 'r0/label/0001', round: 0, stage: 'label', cpus: 2, state: 'walltime', walltime_s: 3600 }, // killed without a record: its walltime
      { task: 'r0/train/0000', round: 0, stage: 'train', cpus: 8, exit: { start: '2026-01-01T02:00:00Z', end: '2026-01-01T02:15:00Z' } },
      { task: 'r1/label/0000', round: 1, stage: 'label', cpus: 1, state: 'lost' }, // unknown
    ]);
    expect(s.byTask.get('r0/label/0000')).toBe(1);
    expect(s.byTask.get('r0/label/0001')).toBe(3 + 2);
    expect(s.byStage.get('r0/label')).toBe(6);
    expect(s.byStage.get('r0/train')).toBe(2);
    expect(s.byRound.get(0)).toBe(8);
    expect(s.byRound.get(1)).toBe(0);
    expect(s.total).toBe(8);
    expect(s.unknown).toBe(1);
    expect(attemptCoreHours({ task: 'x', round: 0, stage: 's', cpus: 4, exit: { start: '2026-01-01T00:00:10Z', end: '2026-01-01T00:00:00Z' } }).hours).toBe(0);
  });
});
