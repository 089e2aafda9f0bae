import { describe, expect, it } from 'vitest';
import { comparePoints, parseTaskRef, parseUntil, taskName, untilPoint } from '../../src/engine/ids.js';

describe('task ids and stop points', () => {
  it('pads task names to four digits, more for big stages', () => {
    expect(taskName(3, 12)).toBe('0003');
    expect(taskName(0, 1)).toBe('0000');
    expect(taskName(12345, 20000)).toBe('12345');
    expect(taskName(7, 20000)).toBe('00007');
  });

  it('parses tasks and stages', () => {
    expect(parseTaskRef('r0/label/0003')).toEqual({ round: 0, stage: 'label', task: '0003' });
    expect(parseTaskRef('r12/simulate/hot-1.5')).toEqual({ round: 12, stage: 'simulate', task: 'hot-1.5' });
    expect(parseTaskRef('r1/train')).toEqual({ round: 1, stage: 'train' });
    expect(parseTaskRef('1/train')).toEqual({ round: 1, stage: 'train' });
    expect(parseTaskRef('r1/trian')).toBeUndefined();
    expect(parseTaskRef('label')).toBeUndefined();
    expect(parseTaskRef('r1/label/a/b')).toBeUndefined();
  });

  it('parses --stop-before points in their three forms', () => {
    expect(parseUntil('2')).toEqual({ round: 2 });
    expect(parseUntil('r2')).toEqual({ round: 2 });
    expect(parseUntil('r1/train')).toEqual({ round: 1, stage: 'train' });
    expect(parseUntil('train')).toEqual({ stage: 'train' });
    expect(parseUntil('r1/train/0000')).toBeUndefined();
    expect(parseUntil('soon')).toBeUndefined();
  });

  it('places a bare stage at its next occurrence', () => {
    // In r0/label: the next train is r0/train; the next sample is r1/sample.
    expect(untilPoint({ stage: 'train' }, { round: 0, stage: 'label' })).toEqual({ round: 0, stage: 'train' });
    expect(untilPoint({ stage: 'sample' }, { round: 0, stage: 'label' })).toEqual({ round: 1, stage: 'sample' });
    // While train itself is going on, --stop-before train stops at once.
    expect(untilPoint({ stage: 'train' }, { round: 3, stage: 'train' })).toEqual({ round: 3, stage: 'train' });
    expect(untilPoint({ round: 2 }, { round: 0, stage: 'label' })).toEqual({ round: 2, stage: 'sample' });
  });

  it('orders points by round, then stage', () => {
    expect(comparePoints({ round: 0, stage: 'simulate' }, { round: 1, stage: 'sample' })).toBeLessThan(0);
    expect(comparePoints({ round: 1, stage: 'train' }, { round: 1, stage: 'label' })).toBeGreaterThan(0);
    expect(comparePoints({ round: 1, stage: 'train' }, { round: 1, stage: 'train' })).toBe(0);
  });
});
