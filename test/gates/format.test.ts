import { describe, expect, it } from 'vitest';
import { renderTable } from '../../src/report/table.js';
import { formatResult, resultJson } from '../../src/gates/format.js';
import { summarizeCommittee, committeeFrame } from '../../src/gates/committee.js';
import { makeFrame } from './helpers.js';

describe('readable output', () => {
  it('renderTable pads columns and right-aligns numeric ones', () => {
    expect(renderTable([['pair', 'closest (Å)'], ['H-H', '0.74'], ['O-Si', '1.6']], { indent: '  ' })).toBe(
      '  pair  closest (Å)\n  H-H          0.74\n  O-Si          1.6\n',
    );
  });

  it('a long committee run is summarised in text; --json keeps every frame', () => {
    const frames = Array.from({ length: 25 }, (_, k) =>
      makeFrame({ species: ['H'], positions: [0, 0, 0], arrays: { forces_0: [k / 100, 0, 0], forces_1: [-k / 100, 0, 0] } }),
    );
    const r = summarizeCommittee(frames.map((f, k) => committeeFrame(f, k)));
    expect(formatResult(r)).toContain('(per-frame spreads and bands: --json)');
    const o = resultJson(r);
    expect((o.max_spread as number[]).length).toBe(25);
    expect(Object.keys(o).slice(0, 3)).toEqual(['gate', 'verdict', 'reasons']);
  });
});
