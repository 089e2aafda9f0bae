/**
 * Spread calibration (src/select/calibration.ts): on a synthetic committee whose true error is a known
 * multiple of its spread, the ratio is recovered; quantiles agree with NumPy's (an independent library,
 * Debian's python3-numpy, `numpy.quantile` with its default linear method, type 7 of Hyndman & Fan 1996).
 */
import { execFileSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import { median as ssMedian } from 'simple-statistics';
import { calibrateFrame, calibratedWindow, quantile, summarizeCalibration } from '../../src/select/calibration.js';
import { seededRandom } from '../../src/select/random.js';

/** Spread of one atom by the glossary's definition, written out independently of atomSpreads. */
function spreadOf(forces: number[][], a: number): number {
  const m = forces.length;
  const mean = [0, 1, 2].map((k) => forces.reduce((s, f) => s + f[3 * a + k], 0) / m);
  let s2 = 0;
  for (const f of forces) for (let k = 0; k < 3; k++) s2 += (f[3 * a + k] - mean[k]) ** 2;
  return Math.sqrt(s2 / m);
}

/** A frame of `atoms` atoms, M = 4 members around a mean force with per-atom spread s_a, and a reference r x s_a away. */
function syntheticFrame(rand: () => number, atoms: number, r: number): { committee: number[][]; reference: number[] } {
  const m = 4;
  const committee = Array.from({ length: m }, () => new Array<number>(3 * atoms).fill(0));
  const reference = new Array<number>(3 * atoms).fill(0);
  for (let a = 0; a < atoms; a++) {
    const s = 0.05 + 0.5 * rand();
    const mean = [rand() - 0.5, rand() - 0.5, rand() - 0.5];
    // Deviations +d, -d, +e, -e with |d|^2 + |e|^2 = 2 s^2: the mean is unchanged, the rms deviation is s.
    const d = [s, 0, 0];
    const e = [0, s, 0];
    const devs = [d, d.map((x) => -x), e, e.map((x) => -x)];
    for (let j = 0; j < m; j++) for (let k = 0; k < 3; k++) committee[j][3 * a + k] = mean[k] + devs[j][k];
    // Reference r * s away from the mean, along a random unit direction.
    const u = [rand() - 0.5, rand() - 0.5, rand() - 0.5];
    const n = Math.hypot(...u);
    for (let k = 0; k < 3; k++) reference[3 * a + k] = mean[k] + (r * s * u[k]) / n;
  }
  return { committee, reference };
}

describe('spread calibration', () => {
  it('recovers a known ratio of true error to spread', () => {
    const g = seededRandom('calibration-test');
    const rand = () => g.uniform();
    for (const r of [0.5, 1, 1.8, 3]) {
      const samples = [];
      for (let f = 0; f < 40; f++) {
        const { committee, reference } = syntheticFrame(rand, 5 + (f % 7), r);
        const atoms = reference.length / 3;
        const s = calibrateFrame(committee, reference, atoms)!;
        // The frame's spread is the largest atom spread (independent formula).
        const expected = Math.max(...Array.from({ length: atoms }, (_, a) => spreadOf(committee, a)));
        expect(s.spread).toBeCloseTo(expected, 12);
        samples.push(s);
      }
      const sum = summarizeCalibration(samples);
      expect(sum.frames).toBe(40);
      expect(sum.median).toBeCloseTo(r, 10);
      expect(sum.p90).toBeCloseTo(r, 10);
      if (r !== 1) expect(sum.above_one).toBe(r > 1 ? 40 : 0);
    }
  });

  it('gives no ratio for a zero spread or non-finite forces', () => {
    const same = [[1, 0, 0], [1, 0, 0]];
    expect(calibrateFrame(same, [0, 0, 0], 1)).toBeNull();
    expect(calibrateFrame([[NaN, 0, 0], [1, 0, 0]], [0, 0, 0], 1)).toBeNull();
    expect(summarizeCalibration([])).toMatchObject({ frames: 0, median: null, p90: null });
  });

  it('quantiles agree with simple-statistics (median) and NumPy (type 7)', () => {
    const g = seededRandom('quantiles');
    const rand = () => g.uniform();
    const values = Array.from({ length: 37 }, () => rand() * 3);
    const sorted = Float64Array.from(values).sort();
    expect(quantile(sorted, 0.5)).toBeCloseTo(ssMedian(values), 12);
    let numpy: number[] | null = null;
    try {
      numpy = JSON.parse(
        execFileSync('/usr/bin/python3', ['-c', 'import json,sys,numpy; v=json.load(sys.stdin); print(json.dumps([float(numpy.quantile(v,q)) for q in (0.1,0.5,0.9)]))'], {
          input: JSON.stringify(values),
        }).toString(),
      );
    } catch {
      console.warn('numpy not available (/usr/bin/python3 -c "import numpy" failed): NumPy cross-check skipped');
    }
    if (numpy) [0.1, 0.5, 0.9].forEach((q, k) => expect(quantile(sorted, q)).toBeCloseTo(numpy![k], 12));
  });

  it('scales the window by the ratio', () => {
    expect(calibratedWindow({ lower: 0.05, upper: 0.5 }, 2)).toEqual({ lower: 0.025, upper: 0.25, ratio: 2 });
    expect(calibratedWindow({ lower: 0.05, upper: 0.5 }, null)).toEqual({ lower: 0.05, upper: 0.5, ratio: null });
  });
});
