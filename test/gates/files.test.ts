/**
 * The high-level checks on real files: extended XYZ written by the project's writer, read back through the reader and
 * mapFrames (once through worker threads), frames numbered across files, and reader errors passed through.
 */
import { describe, expect, it, beforeAll, afterAll } from 'vitest';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { writeFrames } from '../../src/atoms/xyz/writer.js';
import { XyzError } from '../../src/atoms/xyz/reader.js';
import { lastMapStats } from '../../src/atoms/xyz/map.js';
import { checkCommittee, checkContacts, checkDrift, checkErrors, atomSpreads, GateInputError } from '../../src/gates/index.js';
import { lcg, makeFrame } from './helpers.js';
import { oscillatorRun } from './oscillator.js';

let dir: string;
beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'ratchet-gates-'));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));
const at = (name: string) => join(dir, name);

describe('checks on files', () => {
  it('contacts: frames numbered across files in order, .gz read too', async () => {
    const h2 = (d: number) => makeFrame({ species: ['H', 'H'], positions: [0, 0, 0, d, 0, 0], info: { energy: -1 } });
    await writeFrames(at('a.xyz'), [h2(0.74), h2(0.75)]);
    await writeFrames(at('b.xyz.gz'), [h2(0.76), h2(0.2), h2(0.1)]);
    const res = await checkContacts([at('a.xyz'), at('b.xyz.gz')]);
    expect(res.figures.frames).toBe(5);
    expect(res.figures.files).toEqual([
      { path: at('a.xyz'), first_frame: 0, frames: 2 },
      { path: at('b.xyz.gz'), first_frame: 2, frames: 3 },
    ]);
    expect(res.figures.first_violation_frame).toBe(3);
    expect(res.figures.min_distance).toMatchObject({ value: 0.1, frame: 4 });
    expect(res.verdict).toBe('fail');
    expect(res.reasons[0]).toContain(`first frame with one is frame 3 (frame 1 of ${at('b.xyz.gz')})`);
  });

  it('drift: the oscillator run written to a file gives the same figures as in memory', async () => {
    const osc = oscillatorRun({ species: ['Ar', 'Ar'], k: 1, h: 2, steps: 2000, every: 10, q0: [0.1, 0, 0, 0, 0.05, 0], v0: [0, 0.001, 0, 0, 0, 0.002] });
    await writeFrames(at('md.xyz'), osc.frames);
    const res = await checkDrift([at('md.xyz')]);
    expect(res.figures.frames).toBe(201);
    expect(res.figures.energy_source).toBe('energy+kinetic');
    expect(res.verdict).toBe('pass');
    const { summarizeDrift, driftFrame } = await import('../../src/gates/drift.js');
    const mem = summarizeDrift(osc.frames.map((f, k) => driftFrame(f, k)));
    expect(res.figures.slope_meV_per_atom_per_ps).toBe(mem.figures.slope_meV_per_atom_per_ps); // bit-identical round trip
    expect(res.figures.mean_temperature_K).toBe(mem.figures.mean_temperature_K);
  });

  it('drift: a run whose file holds nan and inf (as an MD code prints them) fails, naming the frame', async () => {
    const frames = [0, 1, 2, 3].map((k) =>
      makeFrame({
        species: ['Ar'],
        positions: k === 2 ? [NaN, 0, 0] : [0, 0, 0],
        info: { total_energy: k === 3 ? Infinity : -1, time: k },
      }),
    );
    await writeFrames(at('blow.xyz'), frames);
    const res = await checkDrift([at('blow.xyz')]);
    expect(res.verdict).toBe('fail');
    expect(res.figures.first_bad_frame).toBe(2);
    expect(res.reasons[0]).toBe(`the run blew up: frame 2 of ${at('blow.xyz')} has non-finite positions (atom 0); figures cover the 2 frame(s) before it`);
  });

  it('errors: reference vs predicted files; frame counts must agree', async () => {
    const r = lcg(9);
    const mk = (e: number, f: number[]) => makeFrame({ species: ['O', 'H'], positions: [0, 0, 0, 0.97, 0, 0], info: { energy: e }, arrays: { forces: f } });
    const ref = [0, 1, 2].map(() => mk(-10, Array.from({ length: 6 }, () => r())));
    const pred = ref.map((f) => mk(-10.004, Array.from(f.arrays.get('forces')!.values as Float64Array, (x) => x + 0.01)));
    await writeFrames(at('ref.xyz'), ref);
    await writeFrames(at('pred.xyz'), pred);
    const res = await checkErrors(at('ref.xyz'), at('pred.xyz'));
    expect(res.figures.frames).toBe(3);
    expect(res.figures.energy_mae_meV_per_atom!).toBeCloseTo(2, 9);
    expect(res.figures.force_rmse_meV_per_A!).toBeCloseTo(10, 9);
    await writeFrames(at('pred2.xyz'), pred.slice(0, 2));
    await expect(checkErrors(at('ref.xyz'), at('pred2.xyz'))).rejects.toThrow(
      new GateInputError(`${at('pred2.xyz')} has 2 frames but ${at('ref.xyz')} has 3: the reference and predicted files must hold the same frames in the same order`),
    );
    const moved = ref.map((f, k) => mk(-10, Array.from(f.arrays.get('forces')!.values as Float64Array)));
    moved[1].positions[4] = 0.5;
    await writeFrames(at('moved.xyz'), moved);
    await expect(checkErrors(at('ref.xyz'), at('moved.xyz'))).rejects.toThrow(
      `${at('ref.xyz')} vs ${at('moved.xyz')}, frame 1: atom 1 (H) is at (0.97, 0, 0) in the reference but (0.97, 0.5, 0) in the prediction (0.5 Å apart, tolerance 0.0001 Å): not the same structure`,
    );
  });

  it('committee: through worker threads on a file of several MB, same spreads as computed directly', async () => {
    const r = lcg(21);
    const N = 1000;
    const frames = Array.from({ length: 28 }, (_, k) => {
      const arrays: Record<string, number[]> = {};
      const base = Array.from({ length: 3 * N }, () => r() - 0.5);
      for (let m = 0; m < 4; m++) arrays[`forces_${m}`] = base.map((x) => x + 0.02 * (k + 1) * (r() - 0.5));
      return makeFrame({ species: Array(N).fill('Si'), positions: Array.from({ length: 3 * N }, () => 20 * r()), cell: [20, 0, 0, 0, 20, 0, 0, 0, 20], arrays });
    });
    await writeFrames(at('committee.xyz'), frames);
    const res = await checkCommittee([at('committee.xyz')], { workers: 2 });
    // the gate's job does not use the frame index: each thread reads byte ranges of the file itself
    expect(lastMapStats.mode).toBe('ranges');
    expect(res.figures.frames).toBe(28);
    expect(res.figures.models).toBe(4);
    frames.forEach((f, k) => {
      const s = atomSpreads([0, 1, 2, 3].map((m) => f.arrays.get(`forces_${m}`)!.values as Float64Array), N);
      expect(res.figures.max_spread[k]).toBe(Math.max(...s));
    });
    // spread grows with k: the first frames confident, later ones informative
    expect(res.figures.band[0]).toBe('confident');
    expect(res.figures.band[27]).toBe('informative');
  });

  it('committee: files without committee arrays are refused, naming the file', async () => {
    await writeFrames(at('plain.xyz'), [makeFrame({ species: ['H'], positions: [0, 0, 0], arrays: { forces: [0, 0, 0] } })]);
    await expect(checkCommittee([at('plain.xyz')])).rejects.toThrow(
      `${at('plain.xyz')}: the first frame has 0 committee force array(s) named 'forces_0', 'forces_1', ...; a spread needs at least 2`,
    );
  });

  it('reader errors come through as XyzError naming file and line', async () => {
    writeFileSync(at('broken.xyz'), '2\nProperties=species:S:1:pos:R:3\nH 0 0 0\nH 0 zero 0\n');
    const err = await checkContacts([at('broken.xyz')]).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(XyzError);
    expect((err as XyzError).file).toBe(at('broken.xyz'));
    expect((err as XyzError).line).toBe(4);
  });
});
