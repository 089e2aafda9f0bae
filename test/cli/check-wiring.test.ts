/**
 * `ratchet check` wiring in-process: a fresh commander program with the check command registered, stdout/stderr
 * captured, process.exitCode read back (process.exit, used only for usage errors, is intercepted).
 */
import { describe, expect, it, beforeAll, afterAll, afterEach, vi } from 'vitest';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { register } from '../../src/cli/check.js';
import { inProcess } from './in-process.js';
import { writeFrames } from '../../src/atoms/xyz/writer.js';
import { makeFrame } from '../gates/helpers.js';

const ratchet = (...args: string[]) => inProcess(register, ['check', ...args]);

let dir: string;
const at = (name: string) => join(dir, name);
beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'ratchet-check-wiring-'));
  const h2 = (d: number) => makeFrame({ species: ['H', 'H'], positions: [0, 0, 0, d, 0, 0], info: { energy: -1 } });
  await writeFrames(at('h2.xyz'), [h2(0.74)]);
  await writeFrames(at('close.xyz'), [h2(0.74), h2(0.2)]);
  const c = (s: number) => makeFrame({ species: ['H'], positions: [0, 0, 0], info: { energy: -1 }, arrays: { forces: [s, 0, 0], forces_0: [s, 0, 0], forces_1: [-s, 0, 0] } });
  await writeFrames(at('committee.xyz'), [c(0.01), c(0.1), c(0.3)]);
  writeFileSync(at('thermo.csv'), 'time,etot,temp\n0,-100.0,300\n1000,-100.0,310\n2000,-99.9,305\n');
  writeFileSync(at('md.dat'), '# Step PotEng TotEng\n0 -5 -1.0\n100 -5 -1.0\n200 -5 -1.0\n');
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));
afterEach(() => vi.restoreAllMocks());

describe('ratchet check wiring', () => {
  it('contacts --pair-limit (repeatable and comma-separated) overrides the radii', async () => {
    const r = await ratchet('contacts', at('h2.xyz'), '--pair-limit', 'H-H=0.8,H-O=1', '--pair-limit', 'O-O=2', '--json');
    expect(r.code).toBe(1);
    const o = JSON.parse(r.stdout);
    expect(o.limits).toEqual({ 'H-H': 0.8 });
    expect(o.violations).toHaveLength(1);
  });

  it('contacts --scale and caps reach the gate', async () => {
    const r = await ratchet('contacts', at('close.xyz'), '--scale', '1.3', '--max-violations', '1', '--json');
    const o = JSON.parse(r.stdout);
    expect(o.scale).toBe(1.3);
    expect(o.violation_count).toBe(2); // 0.74 and 0.2 are both under 1.3 x 0.62 = 0.806 Å
    expect(o.violations).toHaveLength(1);
  });

  it('contacts --hydrogen-scale reaches the gate', async () => {
    const r = await ratchet('contacts', at('close.xyz'), '--hydrogen-scale', '1.3', '--json');
    const o = JSON.parse(r.stdout);
    expect(o.hydrogen_scale).toBe(1.3);
    expect(o.violation_count).toBe(2); // H-H: max(0.5, 1.3) x 0.62 = 0.806 Å
  });

  it('committee --models: frames lacking a member fail (exit 1), naming frame and key', async () => {
    const r = await ratchet('committee', at('committee.xyz'), '--models', '3');
    expect(r.code).toBe(1);
    expect(r.stdout).toContain('committee: FAIL\n');
    expect(r.stdout).toContain(`3 of 3 frame(s) do not carry exactly the committee's 3 force arrays; the first is frame 0 of ${at('committee.xyz')} with 2 committee force array(s) (forces_0, forces_1) for 3 models (forces_0 ... forces_2): forces_2 missing`);
  });

  it('drift readable text; a fail exits 1', async () => {
    const r = await ratchet('drift', at('thermo.csv'), '--atoms', '10');
    expect(r.code).toBe(1); // 3 frames: too few to judge (at least 10)
    expect(r.stdout).toContain('drift: FAIL\n');
    expect(r.stdout).toMatch(/slope\s+5 ± 2\.9 meV\/atom\/ps \(warn above 0\.1, fail above 1 in magnitude; warn only beyond 2 standard errors\)/);
    expect(r.stdout).toContain('  - 3 usable frames over 2 ps: too few to judge the drift (at least 10 frames over at least 1 ps needed)\n');
    expect(r.stdout).toMatch(/mean temperature\s+305 K\n/);
  });

  it('drift table options: --step-column with --timestep, --energy-column, --format', async () => {
    const r = await ratchet('drift', at('md.dat'), '--atoms', '2', '--timestep', '0.5', '--energy-column', 'TotEng', '--format', 'table', '--json', '--drift-min-span', '0.1', '--drift-min-frames', '3');
    expect(r.code).toBe(0);
    const o = JSON.parse(r.stdout);
    expect(o.time_source).toBe("column 'Step' x 0.5 fs");
    expect(o.duration_ps).toBeCloseTo(0.1, 12);
    expect(o.slope_meV_per_atom_per_ps).toBe(0);
    expect(o.verdict).toBe('pass');
  });

  it('committee readable table and --upper', async () => {
    const r = await ratchet('committee', at('committee.xyz'), '--upper', '0.2');
    expect(r.code).toBe(0); // 1 of 3 runaway: warn
    expect(r.stdout).toContain('committee: WARN\n');
    expect(r.stdout).toMatch(/\n\s+2\s+0\.3\s+0\.3\s+0\s+runaway\n/);
  });

  it.each([
    [
      'a thermo table without an atom count',
      () => ['drift', at('thermo.csv')],
      () => `ratchet: check drift: ${at('thermo.csv')}: a thermo table does not say how many atoms it describes; give the atom count (1 if the energy column is already per atom)\n`,
    ],
    [
      'files without committee arrays',
      () => ['committee', at('h2.xyz')],
      () => `ratchet: check committee: ${at('h2.xyz')}: the first frame has 0 committee force array(s) named 'forces_0', 'forces_1', ...; a spread needs at least 2\n`,
    ],
    [
      'reference and prediction with different frame counts',
      () => ['errors', at('close.xyz'), at('h2.xyz')],
      () => `ratchet: check errors: ${at('h2.xyz')} has 1 frames but ${at('close.xyz')} has 2: the reference and predicted files must hold the same frames in the same order\n`,
    ],
    [
      'an XYZ file given as a drift table',
      () => ['drift', at('h2.xyz'), '--format', 'table', '--atoms', '2'],
      () => `ratchet: check drift: ${at('h2.xyz')}:1: expected a header row naming the columns before the first row of numbers\n`,
    ],
    [
      'a malformed pair limit',
      () => ['contacts', at('h2.xyz'), '--pair-limit', 'HH=1'],
      () => "ratchet: option '--pair-limit <A-B=dist>' argument 'HH=1' is invalid. expected SPECIES-SPECIES=DISTANCE in Å such as O-H=0.8, found 'HH=1'\n",
    ],
    ['a negative scale', () => ['contacts', at('h2.xyz'), '--scale', '-1'], () => "ratchet: option '--scale <x>' argument '-1' is invalid. expected a positive number, found '-1'\n"],
    [
      'an unknown energy source',
      () => ['drift', at('h2.xyz'), '--energy-source', 'pe'],
      () => "ratchet: option '--energy-source <s>' argument 'pe' is invalid. expected one of auto, total, kinetic, found 'pe'\n",
    ],
    ['errors with one file', () => ['errors', at('h2.xyz')], () => "ratchet: missing required argument 'predicted'\n"],
  ])('%s: exit 2 and the exact message', async (_what, args, message) => {
    const r = await ratchet(...args());
    expect(r.code).toBe(2);
    expect(r.stderr).toBe(message());
    expect(r.stdout).toBe('');
  });
});
