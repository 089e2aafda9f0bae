import { describe, expect, it } from 'vitest';
import { contactsFrame, summarizeContacts, normalisePairLimits, pairKey, CONTACTS_DEFAULTS } from '../../src/gates/contacts.js';
import { GateInputError } from '../../src/gates/types.js';
import type { Frame } from '../../src/atoms/frame.js';
import { ase, lcg, makeFrame } from './helpers.js';

const judge = (frames: Frame[], opts = {}) => summarizeContacts(frames.map((f, k) => contactsFrame(f, k, opts)), opts);

describe('contacts on structures with known distances', () => {
  it('H2 at 0.74 Å passes (limit 0.7 x (0.31 + 0.31) Å: the hydrogen scale; Cordero et al. 2008 radius of H)', () => {
    const res = judge([makeFrame({ species: ['H', 'H'], positions: [0, 0, 0, 0.74, 0, 0] })]);
    expect(res.verdict).toBe('pass');
    expect(res.figures.min_distance).toEqual({ value: 0.74, frame: 0, i: 0, j: 1, species: ['H', 'H'] });
    expect(res.figures.pair_min).toEqual({ 'H-H': 0.74 });
    expect(res.figures.limits['H-H']).toBeCloseTo(0.434, 12);
    expect(res.figures.violations).toEqual([]);
  });

  it('two O atoms 0.3 Å apart fail (limit 0.5 x (0.66 + 0.66) Å, Cordero et al. 2008 radius of O)', () => {
    const res = judge([makeFrame({ species: ['O', 'H', 'O'], positions: [0, 0, 0, 5, 0, 0, 0, 0.3, 0] })]);
    expect(res.verdict).toBe('fail');
    expect(res.figures.violations).toHaveLength(1);
    const v = res.figures.violations[0];
    expect(v).toMatchObject({ frame: 0, i: 0, j: 2, species: ['O', 'O'] });
    expect(v.distance).toBeCloseTo(0.3, 12);
    expect(v.limit).toBeCloseTo(0.66, 12);
    expect(res.figures.first_violation_frame).toBe(0);
    expect(res.figures.pair_min['H-O']).toBeCloseTo(5, 12); // H at (5, 0, 0), O at the origin
    expect(res.reasons[0]).toBe('1 pair(s) in 1 frame(s) are closer than their limit; the first frame with one is frame 0, e.g. atoms 0 and 2 (O-O) at 0.3 Å, limit 0.66 Å');
  });

  it('diamond and silicon: nearest neighbour 1.5445 Å and 2.3517 Å (a = 3.5668 Å, 5.431 Å; design.md)', () => {
    const basis = [0, 0, 0, 0, 0.5, 0.5, 0.5, 0, 0.5, 0.5, 0.5, 0, 0.25, 0.25, 0.25, 0.25, 0.75, 0.75, 0.75, 0.25, 0.75, 0.75, 0.75, 0.25];
    for (const [el, a, d] of [
      ['C', 3.5668, 1.5445],
      ['Si', 5.431, 2.3517],
    ] as const) {
      const res = judge([makeFrame({ species: Array(8).fill(el), positions: basis.map((x) => x * a), cell: [a, 0, 0, 0, a, 0, 0, 0, a] })]);
      expect(res.figures.min_distance!.value).toBeCloseTo(d, 4);
      expect(res.figures.pair_min[`${el}-${el}`]).toBeCloseTo((a * Math.sqrt(3)) / 4, 12);
      expect(res.verdict).toBe('pass');
    }
  });

  it('an atom touching its own periodic image counts (i === j)', () => {
    // one Ar in a 1 Å cube: its images at 1 Å along a, b, c are closer than 0.5 x 2 x 1.06 Å (Cordero radius of Ar)
    const frame = makeFrame({ species: ['Ar'], positions: [0.2, 0.3, 0.4], cell: [1, 0, 0, 0, 1, 0, 0, 0, 1] });
    const res = judge([frame]);
    expect(res.verdict).toBe('fail');
    expect(res.figures.min_distance).toMatchObject({ i: 0, j: 0, species: ['Ar', 'Ar'] });
    expect(res.figures.min_distance!.value).toBeCloseTo(1, 12);
    expect(res.figures.violation_count).toBe(3); // +a, +b, +c (each image pair once)
    expect(res.figures.violations.every((v) => v.i === 0 && v.j === 0)).toBe(true);
    // an explicit Ar-Ar limit of 2.5 Å: every lattice vector shorter than 2.5 Å, counted once per +-pair
    let brute = 0;
    for (let x = -3; x <= 3; x++) for (let y = -3; y <= 3; y++) for (let z = -3; z <= 3; z++) if (x || y || z) brute += Math.hypot(x, y, z) < 2.5 ? 1 : 0;
    const wide = judge([frame], { pairLimits: { 'Ar-Ar': 2.5 } });
    expect(wide.figures.violation_count).toBe(brute / 2);
    expect(brute / 2).toBe(40);
    // independent cross-check with Debian's ASE neighbour list on the same structure (full list: each pair twice)
    const n = ase<number>(
      `from ase import Atoms
from ase.neighborlist import neighbor_list
a = Atoms('Ar', positions=[[0.2, 0.3, 0.4]], cell=[1, 1, 1], pbc=True)
print(len(neighbor_list('i', a, 2.5)))`,
      null,
    );
    expect(n / 2).toBe(40);
  });

  it('matches ASE on a random triclinic H/O/Si structure: per-pair minima and the number of violations', () => {
    const r = lcg(42);
    const species = Array.from({ length: 30 }, (_, k) => ['H', 'O', 'Si'][k % 3]);
    const cell = [6, 0, 0, 2.5, 5.5, 0, -1.5, 1.2, 5.8];
    const frac = Array.from({ length: 90 }, () => r());
    const positions: number[] = [];
    for (let a = 0; a < 30; a++) {
      const [s0, s1, s2] = frac.slice(3 * a, 3 * a + 3);
      for (let c = 0; c < 3; c++) positions.push(s0 * cell[c] + s1 * cell[3 + c] + s2 * cell[6 + c]);
    }
    const frame = makeFrame({ species, positions, cell, pbc: [true, true, false] });
    const limits = { 'H-H': 1.5, 'H-O': 1.2, 'H-Si': 1.6, 'O-O': 1.8, 'O-Si': 1.7, 'Si-Si': 2.4 };
    const res = judge([frame], { pairLimits: limits, maxPerFrame: 1000 });
    // Independent cross-check: Debian's ASE neighbour list on the same structure, cutoff 8 Å
    const theirs = ase<{ min: Record<string, number>; count: number }>(
      `from ase import Atoms
from ase.neighborlist import neighbor_list
a = Atoms(data['species'], positions=data['positions'], cell=data['cell'], pbc=[True, True, False])
i, j, d = neighbor_list('ijd', a, 8.0)
mins, count = {}, 0
for p, q, dist in zip(i, j, d):
    key = '-'.join(sorted([data['species'][p], data['species'][q]]))
    mins[key] = min(mins.get(key, 1e9), float(dist))
    if dist < data['limits'][key]: count += 1
print(json.dumps({'min': mins, 'count': count // 2}))`,
      { species, positions: chunk(positions), cell: chunk(cell), limits },
    );
    expect(Object.keys(res.figures.pair_min).sort()).toEqual(Object.keys(theirs.min).sort());
    for (const [k, v] of Object.entries(theirs.min)) expect(res.figures.pair_min[k]).toBeCloseTo(v, 10);
    expect(theirs.count).toBeGreaterThan(3); // the limits were chosen so that several pairs violate
    expect(res.figures.violation_count).toBe(theirs.count);
    expect(res.figures.violations).toHaveLength(theirs.count);
  });
});

describe('contacts: caps, frames, refusals', () => {
  it('keeps the most severe violations per frame, counts them all, and caps the total', () => {
    // 50 H atoms on a line 0.01 Å apart: every pair less than 0.7 x 0.62 = 0.434 Å apart violates
    const positions = Array.from({ length: 50 }, (_, k) => [0.01 * k, 0, 0]).flat();
    const frame = makeFrame({ species: Array(50).fill('H'), positions });
    const s = contactsFrame(frame, 0, { maxPerFrame: 5 });
    // brute force over all pairs of the same coordinates (compared with the same limit expression, so count exactly)
    let expected = 0;
    for (let i = 0; i < 50; i++) for (let j = i + 1; j < 50; j++) if (Math.abs(positions[3 * j] - positions[3 * i]) < 0.7 * (0.31 + 0.31)) expected++;
    expect(expected).toBeGreaterThan(1000);
    expect(s.violationCount).toBe(expected);
    expect(s.violations).toHaveLength(5);
    for (const v of s.violations) expect(v.distance).toBeCloseTo(0.01, 12); // nearest neighbours first
    const res = summarizeContacts([s, s, s], { maxViolations: 12 });
    expect(res.figures.violation_count).toBe(3 * expected);
    expect(res.figures.violations).toHaveLength(12);
    expect(res.figures.violations.map((v) => v.frame)).toEqual([0, 0, 0, 0, 0, 1, 1, 1, 1, 1, 2, 2]);
    expect(res.reasons).toContain(`12 of ${3 * expected} violations are listed`);
  });

  it('frames in order: the global minimum and the first violating frame are named', () => {
    const frames = [0.9, 0.8, 0.2, 0.1, 0.7].map((d) => makeFrame({ species: ['H', 'H'], positions: [0, 0, 0, 0, 0, d] }));
    const res = judge(frames);
    expect(res.figures.frames).toBe(5);
    expect(res.figures.min_distance).toMatchObject({ value: 0.1, frame: 3 });
    expect(res.figures.first_violation_frame).toBe(2);
    expect(res.figures.violation_frames).toBe(2);
    expect(res.figures.pair_min_at['H-H']).toEqual({ frame: 3, i: 0, j: 1 });
  });

  it('explicit pair limits override the radii, in either order; malformed ones are refused', () => {
    expect(pairKey('O', 'H')).toBe('H-O');
    expect(normalisePairLimits({ 'O-H': 0.8 })).toEqual({ 'H-O': 0.8 });
    const frame = makeFrame({ species: ['O', 'H'], positions: [0, 0, 0, 0.7, 0, 0] });
    expect(judge([frame]).verdict).toBe('pass');
    expect(judge([frame], { pairLimits: { 'O-H': 0.8 } }).verdict).toBe('fail');
    expect(() => normalisePairLimits({ OH: 1 })).toThrow(new GateInputError("pair limit 'OH': expected two species joined by '-', such as O-H"));
    expect(() => normalisePairLimits({ 'O-H': -1 })).toThrow("pair limit 'O-H': expected a positive distance in Å, found -1");
  });

  it('a species without a radius needs explicit limits for its pairs', () => {
    const frame = makeFrame({ species: ['X', 'H'], positions: [0, 0, 0, 1, 0, 0] });
    expect(() => judge([frame])).toThrow(
      "frame 0: unknown element symbol 'X': expected a chemical symbol such as H, He, Li ... Og; give an explicit limit for the pair H-X",
    );
    const ok = judge([frame], { pairLimits: { 'X-H': 0.5, 'X-X': 1 } });
    expect(ok.verdict).toBe('pass');
  });

  it('non-finite positions fail, naming the frame; no crash', () => {
    const good = makeFrame({ species: ['H', 'H'], positions: [0, 0, 0, 0.74, 0, 0] });
    const bad = makeFrame({ species: ['H', 'H'], positions: [0, 0, 0, NaN, 0, 0] });
    const res = judge([good, bad, bad]);
    expect(res.verdict).toBe('fail');
    expect(res.figures.first_bad_frame).toBe(1);
    expect(res.reasons[0]).toBe('2 frame(s) have non-finite positions (the run blew up); the first is frame 1 with non-finite positions (atom 1)');
    expect(res.figures.min_distance!.value).toBe(0.74);
  });

  it('a lone atom without periodicity has no pair: pass with no minimum; no frames: fail', () => {
    const res = judge([makeFrame({ species: ['Ar'], positions: [0, 0, 0] })]);
    expect(res.verdict).toBe('pass');
    expect(res.figures.min_distance).toBeNull();
    expect(judge([]).verdict).toBe('fail');
    expect(CONTACTS_DEFAULTS.scale).toBe(0.5);
    expect(CONTACTS_DEFAULTS.hydrogenScale).toBe(0.7);
  });
});

function chunk(p: ArrayLike<number>): number[][] {
  const out: number[][] = [];
  for (let k = 0; k < p.length; k += 3) out.push([p[k], p[k + 1], p[k + 2]]);
  return out;
}
