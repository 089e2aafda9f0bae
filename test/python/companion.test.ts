/**
 * The Python companion (python/ratchet_task.py), run with Debian's /usr/bin/python3:
 * - frames it writes are read back identically by ratchet's reader (src/atoms/xyz/reader.ts), by its
 *   own reader, and by ASE's extxyz reader (an independent general-purpose library), with and without
 *   ASE importable (RATCHET_TASK_NO_ASE=1);
 * - ASE momenta become velocities in Å/fs with ASE's time unit Å·sqrt(u/eV) = 10.1805 fs (derived here
 *   from CODATA 2018, Tiesinga et al. 2021, independently of both the module and src/atoms/units.ts);
 * - Task.load reads task.json and the RATCHET_* variables as the engine writes them (src/engine/plan.ts),
 *   and names the file and key of a bad task.
 * Skipped with a message when /usr/bin/python3 is missing.
 */
import { execFileSync, spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, describe, expect, it } from 'vitest';
import type { Frame } from '../../src/atoms/frame.js';
import { readFrames } from '../../src/atoms/xyz/reader.js';

const PY = '/usr/bin/python3';
const REPO = fileURLToPath(new URL('../../', import.meta.url));
const HELPER = join(REPO, 'test/python/companion_roundtrip.py');
const MODULE_DIR = join(REPO, 'python');
const havePython = existsSync(PY);
if (!havePython) console.warn(`companion tests skipped: ${PY} not found (apt-get install python3)`);
const haveAse = havePython && spawnSync(PY, ['-c', 'import ase'], { encoding: 'utf8' }).status === 0;
if (havePython && !haveAse) console.warn('companion tests: ASE (python3-ase) is not installed; the ASE read-back is skipped');

type Json = { symbols: string[]; positions: number[][]; cell: number[][] | null; pbc: boolean[]; info: Record<string, unknown>; arrays: Record<string, unknown[]> };

/** A ratchet Frame in the JSON shape the helper prints. */
function asJson(f: Frame): Json {
  const rows = (v: ArrayLike<number>, w: number) => Array.from({ length: v.length / w }, (_, i) => Array.from(v).slice(w * i, w * i + w));
  const arrays: Record<string, unknown[]> = {};
  for (const [name, col] of f.arrays) {
    const vals = col.type === 'S' ? (col.values as string[]) : Array.from(col.values as Float64Array, (x) => (col.type === 'L' ? x === 1 : x));
    arrays[name] = col.width === 1 ? vals : rows(vals as number[], col.width);
  }
  return {
    symbols: f.species,
    positions: rows(f.positions, 3),
    cell: f.cell ? rows(f.cell, 3) : null,
    pbc: [...f.pbc],
    info: Object.fromEntries(f.info),
    arrays,
  };
}

async function ratchetRead(path: string): Promise<Json[]> {
  const out: Json[] = [];
  for await (const f of readFrames(path)) out.push(asJson(f));
  return out;
}

const dirs: string[] = [];
afterAll(() => dirs.forEach((d) => rmSync(d, { recursive: true, force: true })));
function tmp(): string {
  const d = mkdtempSync(join(tmpdir(), 'ratchet-py-'));
  dirs.push(d);
  return d;
}

describe.skipIf(!havePython)('python/ratchet_task.py', () => {
  for (const noAse of [false, true]) {
    it(`writes frames that ratchet's reader${noAse ? '' : ' and ASE'} read back identically (${noAse ? 'without' : 'with'} ASE)`, async () => {
      const dir = tmp();
      const env = { ...process.env, ...(noAse ? { RATCHET_TASK_NO_ASE: '1' } : {}) };
      const report = JSON.parse(execFileSync(PY, [HELPER, dir], { env, encoding: 'utf8' }));
      expect(report.have_ase).toBe(!noAse && haveAse);
      const ours = await ratchetRead(join(dir, 'written.xyz'));
      expect(ours).toHaveLength(2);
      // ratchet's reader against the companion's own reader: every symbol, number, key and flag.
      expect(report.own).toEqual(ours);
      // What went in (set by the helper, written here again as the expected values).
      expect(ours[0].info.energy).toBeCloseTo((-137.1 + -137.3) / 2, 12);
      expect(ours[0].info.label).toBe('a b "c"');
      expect(ours[0].arrays.forces_1).toEqual([[0.12, -0.18, 0.31], [0, 0.01, 0], [-0.12, 0.17, -0.31]]);
      expect(ours[0].arrays.forces[1]).toEqual([0.5e-7, (2.5e-12 + 0.01) / 2, 0]);
      expect(ours[1].cell).toEqual([[5.25, 0, 0], [0, 5.25, 0], [0, 0, 5.25]]);
      expect(ours[1].info.energy).toBe(-0.1234567890123);
      expect(ours[1].info.stopped).toBe('contact');
      if (!noAse && haveAse) {
        // ASE puts energy and forces on a calculator; the helper puts them back in info/arrays.
        expect(report.ase).toEqual(ours);
      } else {
        expect(report.ase).toBeUndefined();
      }
    });
  }

  it.skipIf(!haveAse)('turns ASE momenta into velocities in Å/fs and back', () => {
    const dir = tmp();
    const r = JSON.parse(execFileSync(PY, [HELPER, dir], { encoding: 'utf8' })).from_atoms;
    // CODATA 2018: 1 u = 1.66053906660e-27 kg, 1 eV = 1.602176634e-19 J; ASE time unit = 1 Å·sqrt(u/eV).
    const unitFs = 1e-10 * Math.sqrt(1.6605390666e-27 / 1.602176634e-19) * 1e15;
    expect(unitFs).toBeCloseTo(10.1805, 4);
    r.momenta.forEach((p: number[], i: number) =>
      p.forEach((pc, c) => expect(r.velocities[i][c]).toBeCloseTo(pc / r.masses[i] / unitFs, 14)),
    );
    expect(r.momenta_again).toEqual(r.momenta.map((p: number[]) => p.map((x) => expect.closeTo(x, 12))));
    expect(r.energy).toBe(-137.25);
    expect(r.energy_again).toBe(-137.25);
    expect(r.forces).toEqual([[0.1, 0.2, 0.3], [0, 0, 0], [-0.1, -0.2, -0.3]]);
  });

  const runTask = (dir: string, env: Record<string, string>, code: string) =>
    spawnSync(PY, ['-c', `import sys, json; sys.path.insert(0, ${JSON.stringify(MODULE_DIR)}); import ratchet_task as rt\n${code}`], {
      cwd: dir,
      env: { PATH: process.env.PATH ?? '/usr/bin:/bin', ...env },
      encoding: 'utf8',
    });

  it('reads task.json and the RATCHET_* variables the engine exports', () => {
    const dir = tmp();
    const json = {
      campaign: 'c', round: 2, stage: 'simulate', task: 'r2/simulate/hot', seed: 17,
      inputs: { model_10: '/m/10.json', model_2: '/m/2.json', start: '/s.xyz' },
      params: { temperature: 300, steps: 1000, timestep: 0.5, write_every: 10, committee: { size: 3 } },
      outputs: { trajectory: 'trajectory.xyz' },
      input_artifacts: {}, output_roles: { trajectory: 'trajectory' },
    };
    writeFileSync(join(dir, 'task.json'), JSON.stringify(json));
    const env = { RATCHET_TASK_JSON: join(dir, 'task.json'), RATCHET_TASK_DIR: dir, RATCHET_SEED: '17', RATCHET_PARAM_STEPS: '1000', RATCHET_IN_START: '/elsewhere/s.xyz' };
    const r = runTask(dir, env, `t = rt.Task.load()\nprint(json.dumps({"models": t.models(), "start": t.input("start"), "out": t.output("trajectory"), "T": t.param("temperature", kind=float), "steps": t.param("steps", kind=int), "every": t.param("write_every", 1, int), "seed": t.seed, "round": t.round, "stage": t.stage, "committee": t.params["committee"]}))`);
    expect(r.stderr).toBe('');
    const got = JSON.parse(r.stdout);
    expect(got).toEqual({
      models: ['/m/2.json', '/m/10.json'],
      start: '/elsewhere/s.xyz',
      out: join(dir, 'trajectory.xyz'),
      T: 300, steps: 1000, every: 10, seed: 17, round: 2, stage: 'simulate', committee: { size: 3 },
    });
  });

  it('names the file and key of a bad task', () => {
    const dir = tmp();
    writeFileSync(join(dir, 'task.json'), JSON.stringify({ inputs: {}, outputs: {}, params: { temperature: 'hot' } }));
    const env = { RATCHET_TASK_JSON: join(dir, 'task.json') };
    const bad = runTask(dir, env, 't = rt.Task.load()\nt.param("temperature", kind=float)');
    expect(bad.stderr).toContain(`${join(dir, 'task.json')}: params.temperature: expected a finite number, found 'hot'`);
    const missing = runTask(dir, env, 't = rt.Task.load()\nt.input("frames")');
    expect(missing.stderr).toContain('inputs.frames: missing input (set RATCHET_IN_FRAMES');
    writeFileSync(join(dir, 'broken.json'), '{"inputs": {\n  "a": }');
    const broken = runTask(dir, { RATCHET_TASK_JSON: join(dir, 'broken.json') }, 'rt.Task.load()');
    expect(broken.stderr).toContain(`${join(dir, 'broken.json')}: line 2: not valid JSON`);
    writeFileSync(join(dir, 'bad.xyz'), '2\nProperties=species:S:1:pos:R:3\nH 0 0 0\nH 0 0 x\n');
    const xyz = runTask(dir, {}, `rt.read_frames(${JSON.stringify(join(dir, 'bad.xyz'))})`);
    expect(xyz.stderr).toContain(`${join(dir, 'bad.xyz')}: line 4: column 'pos' expected type R`);
  });
});
