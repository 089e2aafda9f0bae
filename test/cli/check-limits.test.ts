/**
 * `ratchet check errors|drift` limits, in-process: the options are the campaign keys' names, the defaults those of the
 * one table (src/gates/limits.ts), warn above fail and the renamed drift options are bad input (exit 2), and forces are
 * judged per element (exit 1 when one element is above its fail limit although the overall RMSE is not).
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { inProcess } from './in-process.js';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { register } from '../../src/cli/check.js';
import { LIMITS } from '../../src/gates/limits.js';
import { writeFrames } from '../../src/atoms/xyz/writer.js';
import { lcg, makeFrame } from '../gates/helpers.js';

const ratchet = (...args: string[]) => inProcess(register, ['check', ...args]);

let dir: string;
let momentaKinetic = 0;
const at = (name: string) => join(dir, name);
beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'ratchet-check-limits-'));
  // AuCu3, 12 frames: Au components off by ±55.6 meV/Å, Cu by ±46.2 meV/Å; overall 48.72 meV/Å
  const r = lcg(9);
  const species = ['Au', 'Cu', 'Cu', 'Cu'];
  const positions = [0, 0, 0, 1.8, 1.8, 0, 1.8, 0, 1.8, 0, 1.8, 1.8];
  const ref = [];
  const pred = [];
  for (let k = 0; k < 12; k++) {
    const fr = Array.from({ length: 12 }, () => r() - 0.5);
    const fp = fr.map((x, c) => x + (c < 3 ? 0.0556 : 0.0462) * (r() < 0.5 ? -1 : 1));
    ref.push(makeFrame({ species, positions, info: { energy: -10 }, arrays: { forces: fr } }));
    pred.push(makeFrame({ species, positions, info: { energy: -10.002 }, arrays: { forces: fp } }));
  }
  await writeFrames(at('ref.xyz'), ref);
  await writeFrames(at('pred.xyz'), pred);
  // 21 rows over 2 ps, 10 atoms: a flat total energy
  // ASE's momenta (u·Å per ASE time unit) of 4 Cu atoms, 11 frames over 1 ps, no velocities
  const g = lcg(4);
  const p = Array.from({ length: 12 }, () => 0.4 * (g() - 0.5));
  await writeFrames(
    at('momenta.xyz'),
    Array.from({ length: 11 }, (_, k) =>
      makeFrame({ species: ['Cu', 'Cu', 'Cu', 'Cu'], positions: [0, 0, 0, 1.8, 1.8, 0, 1.8, 0, 1.8, 0, 1.8, 1.8], cell: [3.6, 0, 0, 0, 3.6, 0, 0, 0, 3.6], info: { energy: -1, time: 100 * k }, arrays: { momenta: p } }),
    ),
  );
  momentaKinetic = p.reduce((sum, x) => sum + x * x, 0) / (2 * 63.546); // eV: p^2 / 2m in ASE units
  writeFileSync(at('flat.csv'), 'time,etot\n' + Array.from({ length: 21 }, (_, k) => `${k * 100},-100`).join('\n') + '\n');
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('ratchet check errors: limits', () => {
  it('--force-rmse-fail 50 fails on Au 55.6 meV/Å although the overall RMSE is 48.7 (exit 1)', async () => {
    const r = await ratchet('errors', at('ref.xyz'), at('pred.xyz'), '--force-rmse-fail', '50');
    expect(r.code).toBe(1);
    expect(r.stdout).toContain('errors: FAIL\n');
    expect(r.stdout).toContain('  - Au force RMSE 55.6 meV/Å is above the fail limit 50 meV/Å\n');
    expect(r.stdout).toMatch(/force RMSE\s+48\.72 meV\/Å \(warn above 50, fail above 50, overall and per element\)/);
  });

  it('warn above fail is bad input naming both options (exit 2)', async () => {
    const r = await ratchet('errors', at('ref.xyz'), at('pred.xyz'), '--force-rmse-warn', '150', '--force-rmse-fail', '50');
    expect(r.code).toBe(2);
    expect(r.stderr).toContain('--force-rmse-warn 150 is above --force-rmse-fail 50: the warn limit must not be above the fail limit');
    expect(r.stdout).toBe('');
  });

  it('without options the JSON limits are the table defaults, under the campaign key names', async () => {
    const r = await ratchet('errors', at('ref.xyz'), at('pred.xyz'), '--json');
    expect(r.code).toBe(0);
    const o = JSON.parse(r.stdout);
    for (const name of ['energy_rmse', 'energy_mae', 'force_rmse', 'force_mae', 'stress_rmse'] as const)
      expect(o.limits[name]).toEqual({ warn: LIMITS[name].warn, fail: LIMITS[name].fail });
    expect(o.limits.force_rmse).toEqual({ warn: 100, fail: 150 });
    expect(o.judged_frames).toBe(12);
    expect(o.atoms).toBe(48);
  });
});

describe('ratchet check drift: limits', () => {
  it.each([
    ['--slope-warn', '--max-drift-warn'],
    ['--slope-fail', '--max-drift-fail'],
    ['--excursion-warn', '--max-excursion-warn'],
    ['--excursion-fail', '--max-excursion-fail'],
  ])('the renamed %s is bad input naming %s (exit 2)', async (old, now) => {
    const r = await ratchet('drift', at('flat.csv'), '--atoms', '10', old, '1');
    expect(r.code).toBe(2);
    expect(r.stderr).toContain(`${old} was renamed: use ${now}`);
  });

  it('--max-drift-warn above --max-drift-fail is bad input (exit 2)', async () => {
    const r = await ratchet('drift', at('flat.csv'), '--atoms', '10', '--max-drift-warn', '2', '--max-drift-fail', '1');
    expect(r.code).toBe(2);
    expect(r.stderr).toContain('--max-drift-warn 2 is above --max-drift-fail 1: the warn limit must not be above the fail limit');
  });

  it("ASE's momenta are converted, found by themselves or named with --velocities-key momenta", async () => {
    const kB = 8.617333262e-5; // CODATA 2018, eV/K
    const want = (2 * momentaKinetic) / (9 * kB); // 3N - 3 = 9 degrees of freedom
    for (const extra of [[], ['--velocities-key', 'momenta']]) {
      const r = await ratchet('drift', at('momenta.xyz'), '--json', ...extra);
      const o = JSON.parse(r.stdout);
      expect(o.velocities_source).toBe('momenta');
      expect(o.mean_temperature_K / want).toBeCloseTo(1, 9);
    }
  });

  it('a flat run of 21 frames over 2 ps passes with the defaults; --drift-min-span 3 fails it', async () => {
    const ok = await ratchet('drift', at('flat.csv'), '--atoms', '10', '--json');
    expect(ok.code).toBe(0);
    const o = JSON.parse(ok.stdout);
    expect(o.verdict).toBe('pass');
    expect(o.limits).toEqual({ max_drift: { warn: 0.1, fail: 1 }, max_excursion: { warn: 10, fail: 100 } });
    expect(o.sample_limits).toEqual({ min_frames: 10, min_span_ps: 1 });
    const short = await ratchet('drift', at('flat.csv'), '--atoms', '10', '--drift-min-span', '3');
    expect(short.code).toBe(1);
    expect(short.stdout).toContain('  - 21 usable frames over 2 ps: too short to judge the drift (at least 10 frames over at least 3 ps needed)\n');
  });
});
