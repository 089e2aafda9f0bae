/**
 * `ratchet check ...` end to end: spawns `node --import tsx src/cli/index.ts` (no build needed); kept to a few runs,
 * the rest of the wiring is tested in-process in check-wiring.test.ts.
 * Exit codes: 0 pass/warn, 1 fail, 2 bad input. --json prints one object with at least the keys of issue 2.
 */
import { describe, expect, it, beforeAll, afterAll } from 'vitest';
import { spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { writeFrames } from '../../src/atoms/xyz/writer.js';
import { makeFrame } from '../gates/helpers.js';

const root = resolve(import.meta.dirname, '../..');
function ratchet(...args: string[]) {
  const r = spawnSync(process.execPath, ['--import', 'tsx', 'src/cli/index.ts', 'check', ...args], { cwd: root, encoding: 'utf8' });
  return { code: r.status, stdout: r.stdout, stderr: r.stderr };
}
const json = (out: string) => JSON.parse(out) as Record<string, unknown>;

let dir: string;
const at = (name: string) => join(dir, name);
beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'ratchet-cli-check-'));
  const h2 = (d: number) => makeFrame({ species: ['H', 'H'], positions: [0, 0, 0, d, 0, 0], info: { energy: -1 } });
  await writeFrames(at('h2.xyz'), [h2(0.74)]);
  await writeFrames(at('close.xyz'), [h2(0.74), h2(0.2)]);
  const c = (s: number) => makeFrame({ species: ['H'], positions: [0, 0, 0], info: { energy: -1 }, arrays: { forces: [s, 0, 0], forces_0: [s, 0, 0], forces_1: [-s, 0, 0] } });
  await writeFrames(at('committee.xyz'), [c(0.01), c(0.1), c(0.3)]);
  await writeFrames(at('pred.xyz'), [c(0.02), c(0.1), c(0.25)]);
  writeFileSync(at('thermo.csv'), 'time,etot,temp\n0,-100.0,300\n1000,-100.0,310\n2000,-99.9,305\n');
  writeFileSync(at('broken.xyz'), '2\nProperties=species:S:1:pos:R:3\nH 0 0 0\nH 0 zero 0\n');
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('ratchet check: output and exit codes', () => {
  it('contacts: readable table, exit 0 on pass', () => {
    const r = ratchet('contacts', at('h2.xyz'));
    expect(r.code).toBe(0);
    expect(r.stdout).toContain('contacts: PASS\n');
    expect(r.stdout).toMatch(/closest pair\s+0\.7400 Å, atoms 0 and 1 \(H-H\)/);
    expect(r.stderr).toBe('');
  });

  it('contacts --json: the issue keys, 0-based frame indices, exit 1 on fail', () => {
    const r = ratchet('contacts', at('close.xyz'), '--json');
    expect(r.code).toBe(1);
    const o = json(r.stdout);
    for (const k of ['frames', 'min_distance', 'pair_min', 'violations', 'verdict']) expect(o).toHaveProperty(k);
    expect(o.verdict).toBe('fail');
    expect(o.frames).toBe(2);
    expect(o.min_distance).toEqual({ value: 0.2, frame: 1, i: 0, j: 1, species: ['H', 'H'] });
    expect(o.pair_min).toEqual({ 'H-H': 0.2 });
    // H-H limit: hydrogen scale 0.7 x (0.31 + 0.31) Å (Cordero et al. 2008 radius of H)
    expect(o.violations).toEqual([{ frame: 1, i: 0, j: 1, species: ['H', 'H'], distance: 0.2, limit: 0.7 * (0.31 + 0.31) }]);
    expect(r.stdout.trim().split('\n')).toHaveLength(1);
  });

  it('drift on a thermo table: --json keys, warn exits 0', () => {
    // -100 eV -> -99.9 eV over 2 ps for 10 atoms: slope 5 meV/atom/ps by least squares (0, 0, 10 meV/atom at 0, 1, 2 ps)
    // 3 rows over 2 ps are too few for the default minimum (10 frames): lowered here; the excursion of 10 meV/atom
    // is above a warn limit of 5.
    const r = ratchet('drift', at('thermo.csv'), '--atoms', '10', '--json', '--max-drift-fail', '20', '--drift-min-frames', '3', '--max-excursion-warn', '5');
    expect(r.code).toBe(0);
    const o = json(r.stdout);
    for (const k of ['frames', 'atoms', 'slope_meV_per_atom_per_ps', 'std_meV_per_atom', 'max_excursion_meV_per_atom', 'mean_temperature_K', 'verdict'])
      expect(o).toHaveProperty(k);
    expect(o.verdict).toBe('warn');
    expect(o.frames).toBe(3);
    expect(o.atoms).toBe(10);
    expect(o.slope_meV_per_atom_per_ps as number).toBeCloseTo(5, 9);
    expect(o.max_excursion_meV_per_atom as number).toBeCloseTo(10, 9);
    expect(o.mean_temperature_K as number).toBeCloseTo(305, 9);
    // the OLS standard error of the slope: residuals (-1.667, 3.333, -1.667) meV/atom, sqrt(SSR / 1 / 2 ps^2)
    expect(o.slope_se_meV_per_atom_per_ps as number).toBeCloseTo(Math.sqrt((50 / 3) / 2), 9);
    expect(o.limits).toEqual({ max_drift: { warn: 0.1, fail: 20 }, max_excursion: { warn: 5, fail: 100 } });
  });

  it('errors --json: the issue keys', () => {
    const r = ratchet('errors', at('committee.xyz'), at('pred.xyz'), '--json');
    expect(r.code).toBe(0);
    const o = json(r.stdout);
    for (const k of [
      'frames',
      'energy_mae_meV_per_atom',
      'energy_rmse_meV_per_atom',
      'force_mae_meV_per_A',
      'force_rmse_meV_per_A',
      'per_element',
      'max_force_error',
      'verdict',
    ])
      expect(o).toHaveProperty(k);
    // force x errors 10, 0, 50 meV/Å; y and z 0: MAE 60/9, RMSE sqrt(2600/9)
    expect(o.force_mae_meV_per_A as number).toBeCloseTo(60 / 9, 9);
    expect(o.force_rmse_meV_per_A as number).toBeCloseTo(Math.sqrt(2600 / 9), 9);
    expect((o.per_element as Record<string, object>).H).toHaveProperty('force_mae_meV_per_A');
    expect((o.per_element as Record<string, object>).H).toHaveProperty('force_rmse_meV_per_A');
    expect(o.max_force_error).toMatchObject({ frame: 2, atom: 0, component: 'x' });
    expect((o.max_force_error as { value_meV_per_A: number }).value_meV_per_A).toBeCloseTo(50, 9);
  });

  it('committee --json: the issue keys', () => {
    const r = ratchet('committee', at('committee.xyz'), '--json');
    expect(r.code).toBe(0);
    const o = json(r.stdout);
    for (const k of ['frames', 'models', 'max_spread', 'mean_spread', 'bands', 'verdict']) expect(o).toHaveProperty(k);
    expect(o.models).toBe(2);
    expect(o.max_spread).toEqual([0.01, 0.1, 0.3]);
    expect(o.bands).toEqual({ confident: 1, informative: 2, runaway: 0 });
  });
});

describe('ratchet check: bad input exits 2 with a message naming the file', () => {
  it.each([
    ['a missing file', () => ['contacts', at('nope.xyz')], () => `ratchet: check contacts: ${at('nope.xyz')}: no such file or directory; check the path\n`],
    ['a bad option value', () => ['contacts', at('h2.xyz'), '--scale', 'abc'], () => "ratchet: option '--scale <x>' argument 'abc' is invalid. expected a number, found 'abc'\n"],
  ])('%s', (_what, args, message) => {
    const r = ratchet(...args());
    expect(r.code).toBe(2);
    expect(r.stderr).toBe(message());
    expect(r.stdout).toBe('');
  });

  it('a broken extended XYZ file: the reader message with file and line', () => {
    const r = ratchet('contacts', at('broken.xyz'));
    expect(r.code).toBe(2);
    expect(r.stderr.startsWith(`ratchet: check contacts: ${at('broken.xyz')}:4: `)).toBe(true);
  });

  it('an unknown gate', () => {
    const r = ratchet('bogus', at('h2.xyz'));
    expect(r.code).toBe(2);
    expect(r.stderr).toContain("unknown command 'bogus'");
  });
});
