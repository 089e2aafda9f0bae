import { describe, expect, it } from 'vitest';
import type { Frame } from '../../src/atoms/frame.js';
import { pairDistanceFingerprint } from '../../src/select/fingerprint.js';
import { pickInformative, type Candidate } from '../../src/select/pick.js';
import { seededRandom } from '../../src/select/random.js';

function fcc(a: number, n: number, species: (i: number) => string = () => 'Ar'): Frame {
  const basis = [
    [0, 0, 0],
    [0.5, 0.5, 0],
    [0.5, 0, 0.5],
    [0, 0.5, 0.5],
  ];
  const pos: number[] = [];
  for (let i = 0; i < n; i++)
    for (let j = 0; j < n; j++) for (let k = 0; k < n; k++) for (const b of basis) pos.push((i + b[0]) * a, (j + b[1]) * a, (k + b[2]) * a);
  const count = pos.length / 3;
  return {
    species: Array.from({ length: count }, (_, i) => species(i)),
    positions: Float64Array.from(pos),
    cell: Float64Array.from([n * a, 0, 0, 0, n * a, 0, 0, 0, n * a]),
    pbc: [true, true, true],
    arrays: new Map(),
    info: new Map(),
  };
}

const sum = (a: ArrayLike<number>) => Array.from(a).reduce((s, x) => s + x, 0);

describe('pair-distance fingerprint', () => {
  it('counts the fcc coordination shells: 12 nearest and 6 second-nearest neighbours per atom', () => {
    // fcc shells at a/sqrt2 (12 atoms) and a (6 atoms), then a*sqrt(3/2) (24): C. Kittel, Introduction to
    // Solid State Physics, ch. 1 (nearest neighbours 12, second neighbours 6 for fcc).
    const a = 5.26; // argon-like lattice constant, only sets the scale here
    const one = pairDistanceFingerprint(fcc(a, 3), { species: ['Ar'], cutoff: 4.5, bins: 30 });
    expect(sum(one)).toBeCloseTo(12, 10);
    const two = pairDistanceFingerprint(fcc(a, 3), { species: ['Ar'], cutoff: 6.0, bins: 30 });
    expect(sum(two)).toBeCloseTo(18, 10);
    // the nearest-neighbour weight sits in the bins around a/sqrt2
    const width = 6.0 / 30;
    const centre = a / Math.SQRT2 / width - 0.5;
    expect(two[Math.floor(centre)] + two[Math.floor(centre) + 1]).toBeCloseTo(12, 10);
  });

  it('is invariant under permutation and translation, and separates species pairs', () => {
    const f = fcc(4.0, 2, (i) => (i % 2 === 0 ? 'Na' : 'Cl'));
    const base = pairDistanceFingerprint(f, { species: ['Na', 'Cl'], cutoff: 5 });
    expect(base.length).toBe(3 * 24);
    // permute atoms
    const order = Array.from({ length: f.species.length }, (_, i) => i).reverse();
    const perm: Frame = {
      ...f,
      species: order.map((i) => f.species[i]),
      positions: Float64Array.from(order.flatMap((i) => [f.positions[3 * i], f.positions[3 * i + 1], f.positions[3 * i + 2]])),
    };
    const shifted: Frame = { ...f, positions: f.positions.map((x, k) => x + [0.37, -1.2, 2.9][k % 3]) };
    const p = pairDistanceFingerprint(perm, { species: ['Cl', 'Na'], cutoff: 5 });
    const s = pairDistanceFingerprint(shifted, { species: ['Na', 'Cl'], cutoff: 5 });
    for (let k = 0; k < base.length; k++) {
      expect(p[k]).toBeCloseTo(base[k], 12);
      expect(s[k]).toBeCloseTo(base[k], 9);
    }
    expect(() => pairDistanceFingerprint(f, { species: ['Na'] })).toThrow(/atom 1 is Cl, which is not among the campaign's species \(Na\)/);
  });

  it('changes little for a small displacement (no bin jumps)', () => {
    const f = fcc(5.26, 2);
    const g: Frame = { ...f, positions: f.positions.map((x, k) => (k === 0 ? x + 0.001 : x)) };
    const a = pairDistanceFingerprint(f, { species: ['Ar'] });
    const b = pairDistanceFingerprint(g, { species: ['Ar'] });
    const diff = Math.sqrt(Array.from(a).reduce((s, x, k) => s + (x - b[k]) ** 2, 0));
    expect(diff).toBeGreaterThan(0);
    expect(diff).toBeLessThan(0.01);
  });
});

describe('picking informative frames', () => {
  it('never picks confident, runaway or contact-failing frames, and respects the cap', () => {
    const rng = seededRandom('pick');
    const bands = ['confident', 'informative', 'runaway'] as const;
    const cands: Candidate[] = Array.from({ length: 300 }, (_, i) => ({
      spread: rng.uniform(),
      band: bands[i % 3],
      sane: i % 7 !== 0,
      fingerprint: [rng.uniform(), rng.uniform()],
    }));
    const r = pickInformative(cands, 20);
    expect(r.picked.length).toBe(20);
    for (const i of r.picked) {
      expect(cands[i].band).toBe('informative');
      expect(cands[i].sane).toBe(true);
    }
    expect(r.counts).toEqual({ confident: 100, informative: 100, runaway: 100 });
    expect(r.insane).toBe(cands.filter((c) => c.band === 'informative' && !c.sane).length);
    // starts from the largest spread among eligible frames
    const eligible = cands.map((c, i) => i).filter((i) => cands[i].band === 'informative' && cands[i].sane);
    const top = eligible.reduce((b, i) => (cands[i].spread > cands[b].spread ? i : b), eligible[0]);
    expect(r.picked[0]).toBe(top);
    expect(pickInformative(cands.filter((c) => c.band !== 'informative'), 5).picked).toEqual([]);
  });
});
