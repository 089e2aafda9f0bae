import { describe, expect, it } from 'vitest';
import { assessConvergence } from '../../src/select/converge.js';

const cond = (condition: string, frames: number, confident: number, runaway = 0) => ({
  condition,
  frames,
  confident,
  informative: frames - confident - runaway,
  runaway,
});

describe('convergence', () => {
  it('converges only when every condition reaches the target with no runaway frame and validation passed', () => {
    const base = { round: 2, maxRounds: 6, target: 0.99, validationPassed: true };
    expect(assessConvergence({ ...base, conditions: [cond('30K', 100, 100), cond('120K', 200, 198)] }).state).toBe('converged');
    const low = assessConvergence({ ...base, conditions: [cond('30K', 100, 100), cond('120K', 200, 190)] });
    expect(low.state).toBe('continue');
    expect(low.holding).toEqual(['120K']);
    expect(low.reasons[0]).toBe('120K: confident fraction 0.950 < 0.99');
    const runaway = assessConvergence({ ...base, conditions: [cond('30K', 1000, 999, 1)] });
    expect(runaway.state).toBe('continue');
    expect(runaway.reasons[0]).toBe('30K: 1 runaway frame');
    expect(assessConvergence({ ...base, validationPassed: false, conditions: [cond('30K', 10, 10)] }).reasons).toEqual([
      'validation did not pass',
    ]);
  });

  it('stops as exhausted at the round limit, naming the conditions that held it back', () => {
    const r = assessConvergence({
      round: 5,
      maxRounds: 6,
      target: 0.99,
      validationPassed: true,
      conditions: [cond('30K', 100, 100), cond('90K', 100, 80), cond('120K', 100, 50, 3)],
    });
    expect(r.state).toBe('exhausted');
    expect(r.holding).toEqual(['90K', '120K']);
  });

  it('does not count a condition whose run was cut at a contact, however confident its kept frames', () => {
    // Design rule of ratchet (issue 4): a truncated trajectory did not explore the whole condition.
    const r = assessConvergence({
      round: 1,
      maxRounds: 6,
      target: 0.99,
      validationPassed: true,
      conditions: [cond('30K', 100, 100), { ...cond('120K', 40, 40), truncatedAt: 40 }],
    });
    expect(r.state).toBe('continue');
    expect(r.holding).toEqual(['120K']);
    expect(r.reasons[0]).toBe('120K: its run was cut at frame 40 because two atoms came too close, so it did not finish');
    const none = assessConvergence({ round: 1, maxRounds: 6, target: 0.99, validationPassed: true, conditions: [{ ...cond('30K', 100, 100), truncatedAt: null }] });
    expect(none.state).toBe('converged');
  });
});
