/**
 * The water-xtb example (examples/water-xtb): programs this project did not write (Debian's xtb for
 * GFN2-xTB, ASE's integrators) driven through the task contract by the Python companion.
 * - label.py against xtb run directly on one fixed structure (`xtb struct.xyz --grad`, its `gradient`
 *   file parsed here in TypeScript, Hartree and Bohr converted with CODATA 2018, Tiesinga et al. 2021),
 *   and the sign and units of the forces against a central finite difference of xtb's own energies;
 * - the loop reduced for CI (shorter runs, fewer frames) converges on the local backend;
 * - its constant-energy run (ASE's VelocityVerlet) conserves energy, and the written `total_energy`
 *   equals `energy` plus the kinetic energy recomputed here from the written velocities (Å/fs) and
 *   standard atomic weights, which checks the momenta-to-velocities conversion.
 * Skipped with a message when /usr/bin/python3 with ASE and numpy, or xtb, is missing
 * (apt-get install -y xtb python3-ase python3-numpy).
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { atomicMass } from '../../src/atoms/elements.js';
import type { Frame } from '../../src/atoms/frame.js';
import { AMU_A2_PER_FS2_TO_EV, BOHR_A, HARTREE_EV } from '../../src/atoms/units.js';
import { readFrames } from '../../src/atoms/xyz/reader.js';
import { writeExample } from '../../src/campaign/examples.js';
import { BufferOutput } from '../../src/engine/output.js';
import { runCampaign } from '../../src/engine/run.js';

const PY = '/usr/bin/python3';
const REPO = fileURLToPath(new URL('../../', import.meta.url));
const EXAMPLE = join(REPO, 'examples/water-xtb');
const probe = spawnSync(PY, ['-c', 'import ase, numpy'], { encoding: 'utf8' });
const xtbProbe = spawnSync('xtb', ['--version'], { encoding: 'utf8' });
const missing = [
  ...(probe.error || probe.status !== 0 ? ['/usr/bin/python3 with ASE and numpy (apt-get install -y python3-ase python3-numpy)'] : []),
  ...(xtbProbe.error ? ['xtb (apt-get install -y xtb)'] : []),
];
if (missing.length) console.warn(`water-xtb tests skipped: missing ${missing.join(' and ')}`);

async function frames(path: string): Promise<Frame[]> {
  const out: Frame[] = [];
  for await (const f of readFrames(path)) out.push(f);
  return out;
}

const dirs: string[] = [];
afterAll(() => dirs.forEach((d) => rmSync(d, { recursive: true, force: true })));
function tmp(): string {
  const d = mkdtempSync(join(tmpdir(), 'ratchet-water-'));
  dirs.push(d);
  return d;
}

/** A bent, stretched water molecule (Å), away from the minimum so that every force is sizeable. */
const STRUCT: [string, number, number, number][] = [
  ['O', 0.0, 0.02, 0.11],
  ['H', 0.05, 0.81, -0.47],
  ['H', -0.03, -0.74, -0.5],
];
const xyzText = (pos: [string, number, number, number][]) => `${pos.length}\n\n${pos.map((a) => a.join(' ')).join('\n')}\n`;

/** Run `xtb struct.xyz --grad` in a folder of its own; energy (Hartree) and gradient (Hartree/Bohr) from its `gradient` file. */
function xtbDirect(pos: [string, number, number, number][]): { energy: number; gradient: number[][] } {
  const dir = tmp();
  writeFileSync(join(dir, 'struct.xyz'), xyzText(pos));
  const r = spawnSync('xtb', ['struct.xyz', '--grad'], { cwd: dir, encoding: 'utf8', env: { ...process.env, OMP_NUM_THREADS: '1' } });
  if (r.status !== 0) throw new Error(`xtb exited ${r.status}: ${r.stderr}`);
  // Turbomole format: $grad, "cycle = 1  SCF energy = E |dE/dxyz| = g", N coordinate lines, N gradient lines, $end.
  const lines = readFileSync(join(dir, 'gradient'), 'utf8').split('\n').filter((l) => l.trim());
  const c = lines.findIndex((l) => l.includes('cycle ='));
  const energy = Number(/SCF energy =\s*(\S+)/.exec(lines[c])![1]);
  const n = pos.length;
  const gradient = lines.slice(c + 1 + n, c + 1 + 2 * n).map((l) => l.trim().split(/\s+/).map((x) => Number(x.replace(/D/i, 'E'))));
  return { energy, gradient };
}

describe.skipIf(missing.length > 0)('the water-xtb example', () => {
  it('label.py gives the energy and forces of xtb run directly, in eV and eV/Å', async () => {
    const dir = tmp();
    writeFileSync(join(dir, 'in.xyz'), `3\nProperties=species:S:1:pos:R:3 source_frame=7 pbc="F F F"\n${STRUCT.map((a) => a.join(' ')).join('\n')}\n`);
    const r = spawnSync(PY, [join(EXAMPLE, 'label.py')], {
      cwd: dir,
      encoding: 'utf8',
      env: { PATH: process.env.PATH ?? '/usr/bin:/bin', RATCHET_IN_FRAMES: join(dir, 'in.xyz'), RATCHET_OUT_LABELED: join(dir, 'labeled.xyz'), OMP_NUM_THREADS: '1' },
    });
    expect(r.stderr).toBe('');
    expect(r.status).toBe(0);
    const [f] = await frames(join(dir, 'labeled.xyz'));
    expect(f.info.get('source_frame')).toBe(7);
    const direct = xtbDirect(STRUCT);
    const energy = f.info.get('energy') as number;
    expect(energy).toBeCloseTo(direct.energy * HARTREE_EV, 8);
    expect(direct.energy).toBeGreaterThan(-5.1); // GFN2-xTB water is about -5.07 Eh (xtb's own output)
    expect(direct.energy).toBeLessThan(-5.0);
    const forces = f.arrays.get('forces')!.values as Float64Array;
    direct.gradient.flat().forEach((g, i) => expect(forces[i]).toBeCloseTo((-g * HARTREE_EV) / BOHR_A, 8));
    // Sign and units of the forces from xtb's energies alone, on the largest force component:
    // F_k = -(E(x_k + h) - E(x_k - h)) / 2h.
    let k = 0;
    for (let i = 1; i < forces.length; i++) if (Math.abs(forces[i]) > Math.abs(forces[k])) k = i;
    const h = 0.002;
    const atom = Math.floor(k / 3);
    const shifted = (d: number) =>
      STRUCT.map((a, i) => (i === atom ? (a.map((x, c) => (c === 1 + (k % 3) ? (x as number) + d : x)) as typeof a) : a));
    const fd = (-(xtbDirect(shifted(h)).energy - xtbDirect(shifted(-h)).energy) * HARTREE_EV) / (2 * h);
    expect(Math.abs(forces[k])).toBeGreaterThan(0.5);
    expect(forces[k]).toBeCloseTo(fd, 2);
  }, 120_000);

  it('label.py names the frame of a periodic input and exits 2', () => {
    const dir = tmp();
    writeFileSync(join(dir, 'in.xyz'), `1\nLattice="5 0 0 0 5 0 0 0 5" Properties=species:S:1:pos:R:3 pbc="T T T"\nO 0 0 0\n`);
    const r = spawnSync(PY, [join(EXAMPLE, 'label.py')], {
      cwd: dir,
      encoding: 'utf8',
      env: { PATH: process.env.PATH ?? '/usr/bin:/bin', RATCHET_IN_FRAMES: join(dir, 'in.xyz'), RATCHET_OUT_LABELED: join(dir, 'out.xyz') },
    });
    expect(r.status).toBe(2);
    expect(r.stderr).toContain(`${join(dir, 'in.xyz')}: frame 0: periodic frame`);
  });

  describe('the loop, reduced', () => {
    const dir = tmp();
    const out = new BufferOutput();
    let exitCode = -1;
    beforeAll(async () => {
      const { campaign } = await writeExample('water-xtb', dir);
      let text = readFileSync(campaign, 'utf8');
      const edits: [RegExp, string][] = [
        [/steps: 4000, timestep: 0\.5, write_every: 40/g, 'steps: 1000, timestep: 0.5, write_every: 20'],
        [/perturb: \{ count: 40,/, 'perturb: { count: 30,'],
        [/max_per_condition: 15/, 'max_per_condition: 10'],
        [/equilibration_steps: 1000/, 'equilibration_steps: 400'],
        [/confident_fraction: 0\.95/, 'confident_fraction: 0.9'],
      ];
      for (const [re, to] of edits) {
        if (!re.test(text)) throw new Error(`examples/water-xtb/campaign.yaml no longer has ${re}: update this test`);
        text = text.replace(re, to);
      }
      writeFileSync(campaign, text);
      exitCode = (await runCampaign({ campaign, out, error: (m) => out.line(`error: ${m}`) })).exitCode;
    }, 1_200_000);

    it('converges on the local backend', () => {
      const ledger = readFileSync(join(dir, '.ratchet/ledger.jsonl'), 'utf8').trim().split('\n').map((l) => JSON.parse(l));
      const ended = ledger.filter((e) => e.type === 'campaign_ended');
      if (exitCode !== 0 || ended.length !== 1) throw new Error(`ratchet run exited ${exitCode}:\n${out.text.slice(-4000)}`);
      expect(ended[0].state).toBe('converged');
    });

    it("conserves energy in its constant-energy runs (ASE's VelocityVerlet), with total_energy = energy + kinetic energy", async () => {
      const validate = join(dir, 'rounds');
      const files: string[] = [];
      for (const r of readdirSync(validate)) {
        const vdir = join(validate, r, 'validate');
        let names: string[] = [];
        try {
          names = readdirSync(vdir);
        } catch {
          continue;
        }
        for (const n of names.filter((x) => x.startsWith('nve-'))) files.push(join(vdir, n, 'trajectory.xyz'));
      }
      expect(files.length).toBeGreaterThan(0);
      for (const file of files) {
        const fr = await frames(file);
        expect(fr.length).toBeGreaterThan(10);
        const totals: number[] = [];
        const kinetic: number[] = [];
        for (const f of fr) {
          const v = f.arrays.get('velocities')!.values as Float64Array;
          let ke = 0;
          f.species.forEach((s, i) => {
            ke += 0.5 * atomicMass(s) * (v[3 * i] ** 2 + v[3 * i + 1] ** 2 + v[3 * i + 2] ** 2) * AMU_A2_PER_FS2_TO_EV;
          });
          const total = f.info.get('total_energy') as number;
          expect(total).toBeCloseTo((f.info.get('energy') as number) + ke, 4);
          totals.push(total);
          kinetic.push(ke);
        }
        const sd = (x: number[]) => {
          const m = x.reduce((a, b) => a + b, 0) / x.length;
          return Math.sqrt(x.reduce((a, b) => a + (b - m) ** 2, 0) / x.length);
        };
        // Kinetic and potential energy trade places; their sum stays put. Velocity Verlet's energy error
        // scales as (omega dt)^2: for the O-H stretch (about 3700 cm^-1, a period near 9 fs; from memory)
        // at 0.5 fs, omega dt is about 0.35, and the total fluctuates by a few per cent of the kinetic
        // swing (measured about 3 %). A step given in the wrong unit (ASE's time unit is 10.18 fs) or a
        // broken integrator is far beyond 10 %.
        expect(sd(kinetic)).toBeGreaterThan(0.005);
        expect(sd(totals)).toBeLessThan(0.1 * sd(kinetic));
      }
    });
  });
});

