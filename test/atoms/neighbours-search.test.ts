/**
 * The neighbour search's reuse between calls (a per-cell plan cached for periodic cells, work arrays kept between
 * searches) and minimumDistanceByGroup's fused visit (`within`): checked against an independent brute-force loop over
 * lattice images (geometry-helpers.ts) and against separate searches, never against stored numbers.
 */
import { describe, expect, it } from 'vitest';
import { cellFromParameters } from '../../src/atoms/cell.js';
import type { Pbc } from '../../src/atoms/frame.js';
import { forEachPair, minimumDistanceByGroup, speciesGroups, type AtomsGeometry } from '../../src/atoms/neighbours.js';
import { expectBrute, randomSystem } from './geometry-helpers.js';

type Pair = { i: number; j: number; d: number };
const key = (p: Pair) => `${p.i} ${p.j} ${p.d}`;

function pairsOf(sys: AtomsGeometry, cutoff: number): Pair[] {
  const out: Pair[] = [];
  forEachPair(sys, cutoff, (i, j, d) => out.push({ i, j, d }));
  return out;
}

describe('neighbour search reuse between calls', () => {
  it('stays exact across frames that share a cell, cells that change and atom counts that change', () => {
    const skew = cellFromParameters(9, 10, 11, 70, 80, 60);
    const cubic = Float64Array.from([10, 0, 0, 0, 10, 0, 0, 0, 10]);
    const systems: AtomsGeometry[] = [
      randomSystem(1, 60, skew, [true, true, true]),
      randomSystem(2, 60, skew, [true, true, true]), // same cell and count: the cached plan
      randomSystem(3, 61, skew, [true, true, true]),
      randomSystem(4, 60, cubic, [true, true, true]),
      randomSystem(5, 60, skew, [true, true, false]), // mixed periodicity: no cached plan
      randomSystem(6, 60, null, [false, false, false]),
      randomSystem(7, 60, skew, [true, true, true]),
    ];
    for (const sys of systems) for (const cutoff of [2.5, 4]) expectBrute(sys, cutoff, pairsOf(sys, cutoff));
  });

  it('gives a search started from inside a visitor its own work arrays', () => {
    const outer = randomSystem(8, 50, cellFromParameters(8, 8, 8, 90, 90, 90), [true, true, true]);
    const inner = randomSystem(9, 40, cellFromParameters(7, 9, 8, 75, 85, 95), [true, true, true]);
    const alone = pairsOf(inner, 3).map(key).sort();
    const outerPairs: Pair[] = [];
    let nested: string[] | null = null;
    forEachPair(outer, 3, (i, j, d) => {
      outerPairs.push({ i, j, d });
      if (nested === null) nested = pairsOf(inner, 3).map(key).sort();
    });
    expect(nested).toEqual(alone);
    expectBrute(outer, 3, outerPairs);
    // and the outer search's arrays are intact for the next search
    expectBrute(inner, 3, pairsOf(inner, 3));
  });
});

describe('minimumDistanceByGroup with a fused visit', () => {
  it('visits every pair within `within` once and finds the same minima as without it', () => {
    const cell = cellFromParameters(10, 11, 9, 65, 80, 70);
    for (const [seed, within] of [[11, 1.5], [12, 3], [13, 6]] as const) {
      const sys = randomSystem(seed, 70, cell, [true, true, true]);
      const group = Int32Array.from({ length: 70 }, (_, a) => (a * 7) % 3);
      const seen: Pair[] = [];
      const fused = minimumDistanceByGroup(sys, group, 3, { within, visit: (i, j, d) => seen.push({ i, j, d }) });
      const plain = minimumDistanceByGroup(sys, group, 3);
      expect(Array.from(fused.distance)).toEqual(Array.from(plain.distance));
      expect(Array.from(fused.i)).toEqual(Array.from(plain.i));
      expect(Array.from(fused.j)).toEqual(Array.from(plain.j));
      // pairs beyond `within` may be visited too; those within it are all visited, exactly once
      expectBrute(sys, within, seen.filter((p) => p.d < within));
    }
  });

  it('groups species as a sorted list and an index per atom', () => {
    const { names, group } = speciesGroups(['O', 'H', 'H', 'Si', 'O', 'H']);
    expect(names).toEqual(['H', 'O', 'Si']);
    expect(Array.from(group)).toEqual([1, 0, 0, 2, 1, 0]);
  });
});
