import { describe, expect, it } from 'vitest';
import { variance } from 'simple-statistics';
import { atomSpreads, bandOf, committeeFrame, summarizeCommittee, COMMITTEE_DEFAULTS } from '../../src/gates/committee.js';
import { GateInputError } from '../../src/gates/types.js';
import { lcg, makeFrame } from './helpers.js';

const frameWith = (forces: number[][], species = ['H']) =>
  makeFrame({
    species,
    positions: species.flatMap((_, a) => [a, 0, 0]),
    arrays: Object.fromEntries(forces.map((f, m) => [`forces_${m}`, f])),
  });
const judge = (frames: ReturnType<typeof frameWith>[], opts = {}) => summarizeCommittee(frames.map((f, k) => committeeFrame(f, k, opts)), opts);

describe('committee spread', () => {
  it('worked by hand: two models with opposite forces', () => {
    // F0 = (1, 0, 0), F1 = (-1, 0, 0): mean 0, each deviates by 1; sqrt((1 + 1)/2) = 1
    expect(Array.from(atomSpreads([[1, 0, 0], [-1, 0, 0]], 1))).toEqual([1]);
  });

  it('worked by hand: three models, one off', () => {
    // (0,0,0), (0,0,0), (3,0,0): mean (1,0,0); squared deviations 1, 1, 4; sqrt(6/3) = sqrt(2)
    expect(atomSpreads([[0, 0, 0], [0, 0, 0], [3, 0, 0]], 1)[0]).toBeCloseTo(Math.SQRT2, 15);
    // all components: (1,2,2), (-1,-2,-2): mean 0, |dev|^2 = 9 each; spread 3
    expect(atomSpreads([[1, 2, 2], [-1, -2, -2]], 1)[0]).toBeCloseTo(3, 15);
  });

  it('agrees with an independent formula: sqrt of the summed per-component population variance (simple-statistics)', () => {
    const r = lcg(3);
    const M = 5;
    const N = 40;
    const forces = Array.from({ length: M }, () => Array.from({ length: 3 * N }, () => 2 * (r() - 0.5)));
    const s = atomSpreads(forces, N);
    for (let a = 0; a < N; a++) {
      let v = 0;
      for (let c = 0; c < 3; c++) v += variance(forces.map((f) => f[3 * a + c])); // population variance (1/M)
      expect(s[a]).toBeCloseTo(Math.sqrt(v), 12);
    }
    const f = committeeFrame(frameWith(forces, Array(N).fill('O')), 0);
    expect(f.models).toBe(M);
    expect(f.max).toBe(Math.max(...s));
    expect(f.atom).toBe(Array.from(s).indexOf(f.max));
    expect(f.mean).toBeCloseTo(s.reduce((x, y) => x + y, 0) / N, 14);
  });

  it('bands of the window [lower, upper): lower itself is informative, upper itself is runaway, NaN is runaway', () => {
    expect(bandOf(0.0499, 0.05, 0.5)).toBe('confident');
    expect(bandOf(0.05, 0.05, 0.5)).toBe('informative');
    expect(bandOf(0.4999, 0.05, 0.5)).toBe('informative');
    expect(bandOf(0.5, 0.05, 0.5)).toBe('runaway');
    expect(bandOf(NaN, 0.05, 0.5)).toBe('runaway');
    expect(bandOf(Infinity, 0.05, 0.5)).toBe('runaway');
  });

  it('summary: per-frame max and mean, band counts, verdict', () => {
    // spreads 0.01, 0.1, 0.2, 1.0 (two models at +-s along x)
    const frames = [0.01, 0.1, 0.2, 1.0].map((s) => frameWith([[s, 0, 0, 0, 0, 0], [-s, 0, 0, 0, 0, 0]], ['H', 'O']));
    const res = judge(frames);
    expect(res.figures.frames).toBe(4);
    expect(res.figures.models).toBe(2);
    expect(res.figures.max_spread.map((x) => Number(x!.toFixed(12)))).toEqual([0.01, 0.1, 0.2, 1.0]);
    expect(res.figures.mean_spread.map((x) => Number(x!.toFixed(12)))).toEqual([0.005, 0.05, 0.1, 0.5]);
    expect(res.figures.max_spread_atom).toEqual([0, 0, 0, 0]);
    expect(res.figures.band).toEqual(['confident', 'informative', 'informative', 'runaway']);
    expect(res.figures.bands).toEqual({ confident: 1, informative: 2, runaway: 1 });
    expect(res.figures.first_runaway_frame).toBe(3);
    expect(res.verdict).toBe('warn');
    expect(res.reasons[0]).toBe('1 of 4 frame(s) are runaway (spread >= 0.5 eV/Å), the first is frame 3');
    // most frames runaway: fail
    const worse = judge(frames, { upper: 0.15 });
    expect(worse.figures.bands).toEqual({ confident: 1, informative: 1, runaway: 2 });
    expect(worse.verdict).toBe('warn'); // 2 of 4 is not more than half
    expect(judge(frames, { upper: 0.08 }).verdict).toBe('fail');
    expect(judge(frames.slice(0, 3)).verdict).toBe('pass');
  });

  it('non-finite forces: the frame is runaway and named, never a crash', () => {
    const frames = [frameWith([[0.1, 0, 0], [0, 0, 0]]), frameWith([[NaN, 0, 0], [0, 0, 0]])];
    const res = judge(frames);
    expect(res.figures.max_spread).toEqual([0.05, null]);
    expect(res.figures.band).toEqual(['informative', 'runaway']);
    expect(res.figures.non_finite_frames).toBe(1);
    expect(res.reasons).toContain('frame 1 has non-finite forces_0 (atom 0)');
  });

  it('refuses fewer than two models and a bad window; a missing or extra member fails the gate (committee-members.test.ts)', () => {
    expect(() => judge([frameWith([[0, 0, 0]])])).toThrow(new GateInputError("frame 0: found 1 committee force array(s) 'forces_0'...; a spread needs at least 2"));
    const short = judge([frameWith([[0, 0, 0], [0, 0, 0]])], { models: 3 });
    expect(short.verdict).toBe('fail');
    expect(short.figures.incomplete).toEqual([{ frame: 0, present: ['forces_0', 'forces_1'], missing: ['forces_2'], extra: [] }]);
    const grown = judge([frameWith([[0, 0, 0], [0, 0, 0]]), frameWith([[0, 0, 0], [0, 0, 0], [1, 0, 0]])]);
    expect(grown.verdict).toBe('fail');
    expect(grown.figures.models).toBe(2);
    expect(grown.figures.incomplete).toEqual([{ frame: 1, present: ['forces_0', 'forces_1', 'forces_2'], missing: [], extra: ['forces_2'] }]);
    expect(() => judge([], { lower: 0.5, upper: 0.1 })).toThrow('the band window must satisfy 0 <= lower < upper (finite), found lower 0.5, upper 0.1');
  });

  it('a custom prefix, and the documented defaults', () => {
    const f = makeFrame({ species: ['H'], positions: [0, 0, 0], arrays: { f_0: [1, 0, 0], f_1: [-1, 0, 0] } });
    expect(committeeFrame(f, 0, { prefix: 'f_' }).max).toBe(1);
    expect(COMMITTEE_DEFAULTS).toEqual({ prefix: 'forces_', lower: 0.05, upper: 0.5, maxRunawayFraction: 0.5 });
    expect(judge([]).verdict).toBe('fail');
  });
});
