/**
 * contacts: the violations kept per frame are the most severe by (distance / limit, i, j) whatever order the neighbour
 * search visits the pairs in, which matters in crystals where many pairs are equally close. Checked against a
 * brute-force enumeration of the same pairs (independent of the cell list), not against stored numbers.
 */
import { describe, expect, it } from 'vitest';
import { contactsFrame } from '../../src/gates/contacts.js';
import { bruteForcePairs } from '../atoms/geometry-helpers.js';
import { makeFrame } from './helpers.js';

describe('contacts violations with ties', () => {
  it('keeps the first pairs by (ratio, i, j) among equally close ones, and counts them all', () => {
    // simple cubic, 1 Å spacing, 3 x 3 x 3 in a periodic 3 Å cube: 81 nearest-neighbour pairs at exactly 1 Å
    const positions: number[] = [];
    for (let x = 0; x < 3; x++) for (let y = 0; y < 3; y++) for (let z = 0; z < 3; z++) positions.push(x, y, z);
    const species = positions.filter((_, k) => k % 3 === 0).map((_, a) => (a % 2 ? 'H' : 'He'));
    const frame = makeFrame({ species, positions, cell: [3, 0, 0, 0, 3, 0, 0, 0, 3] });
    const limits = { 'H-H': 1.05, 'H-He': 1.2, 'He-He': 1.1 };
    const s = contactsFrame(frame, 0, { pairLimits: limits, maxPerFrame: 7 });
    const limitOf = (i: number, j: number) => limits[[species[i], species[j]].sort().join('-') as keyof typeof limits];
    const brute = bruteForcePairs(frame.positions, frame.cell, frame.pbc, 1.5)
      .map((p) => ({ i: p.i, j: p.j, d: p.d, r: p.d / limitOf(p.i, p.j) }))
      .filter((p) => p.d < limitOf(p.i, p.j))
      .sort((a, b) => a.r - b.r || a.i - b.i || a.j - b.j);
    expect(s.violationCount).toBe(brute.length);
    expect(brute.length).toBe(81);
    expect(s.violations.map((v) => [v.i, v.j])).toEqual(brute.slice(0, 7).map((p) => [p.i, p.j]));
    // per species pair, the closest pair first in (i, j) order among the equally close
    const first = (a: string, b: string) => brute.find((p) => [species[p.i], species[p.j]].sort().join('-') === [a, b].sort().join('-'))!;
    for (const [a, b] of [['H', 'H'], ['H', 'He'], ['He', 'He']]) {
      const key = [a, b].sort().join('-');
      expect(s.pairs[key]).toMatchObject({ distance: 1 });
      const p = first(a, b);
      expect([Math.min(s.pairs[key].i, s.pairs[key].j), Math.max(s.pairs[key].i, s.pairs[key].j)]).toEqual([p.i, p.j]);
    }
    expect(s.min?.distance).toBe(1);
  });
});
