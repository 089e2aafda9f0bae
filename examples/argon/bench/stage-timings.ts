/**
 * Wall-clock timings of the argon demo's stage programs on demo-sized inputs, each run as the engine
 * runs it (a fresh `node --import tsx` process), so process start-up is included.
 *
 *   node --import tsx examples/argon/bench/stage-timings.ts [--cells 2] [--frames 80] [--steps 2000]
 *
 * Prints one line per program: wall seconds and the program's own report. Not a test: numbers depend
 * on the machine and its load.
 */
import { spawnSync } from 'node:child_process';
import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { parseArgs } from 'node:util';
import { writeFrames } from '../../../src/atoms/xyz/writer.js';
import { fccCrystal, ljFccLatticeConstant } from '../lib/lattice.js';
import { createRandom } from '../lib/random.js';

const { values } = parseArgs({ options: { cells: { type: 'string', default: '2' }, frames: { type: 'string', default: '80' }, steps: { type: 'string', default: '2000' }, members: { type: 'string', default: '4' } } });
const cells = Number(values.cells), nFrames = Number(values.frames), steps = Number(values.steps), members = Number(values.members);
const here = resolve(import.meta.dirname, '..');
const dir = await mkdtemp(join(tmpdir(), 'argon-bench-'));

// invented input: rattled fcc frames (0.1 Å Gaussian displacements)
const a = ljFccLatticeConstant(3.405);
const rng = createRandom(1);
const frames = Array.from({ length: nFrames }, () => {
  const f = fccCrystal('Ar', a, cells);
  for (let i = 0; i < f.positions.length; i++) f.positions[i] += 0.1 * rng.normal();
  return f;
});
await writeFrames(join(dir, 'frames.xyz'), frames);
await writeFrames(join(dir, 'start.xyz'), [fccCrystal('Ar', a, cells)]);

function time(label: string, program: string, args: string[]): void {
  const t0 = performance.now();
  const r = spawnSync(process.execPath, ['--import', 'tsx', join(here, program), ...args], { encoding: 'utf8' });
  const s = (performance.now() - t0) / 1000;
  if (r.status !== 0) throw new Error(`${program} failed: ${r.stderr}`);
  process.stdout.write(`${label.padEnd(28)} ${s.toFixed(2).padStart(6)} s wall | ${r.stdout.trim().split('\n')[0]}\n`);
}

const atoms = 4 * cells ** 3;
process.stdout.write(`argon demo stage programs: ${atoms} atoms, ${nFrames} frames, ${steps} MD steps, ${members} members\n`);
time('start-up only (--help)', 'label.ts', ['--help']);
time(`label ${nFrames} frames`, 'label.ts', ['--in', join(dir, 'frames.xyz'), '--out', join(dir, 'labeled.xyz')]);
for (let m = 0; m < members; m++) time(`train member ${m}`, 'train.ts', ['--in', join(dir, 'labeled.xyz'), '--out', join(dir, `models/m${m}.json`), '--seed', String(m), '--member', String(m)]);
time(`md nvt 60 K, ${steps} steps`, 'md.ts', ['--start', join(dir, 'start.xyz'), '--model', join(dir, 'models'), '--out', join(dir, 'traj.xyz'), '--temperature', '60', '--steps', String(steps), '--interval', '20']);
time(`md nve 30 K, ${steps} steps`, 'md.ts', ['--start', join(dir, 'start.xyz'), '--model', join(dir, 'models'), '--out', join(dir, 'nve.xyz'), '--temperature', '30', '--ensemble', 'nve', '--equilibration-steps', '200', '--steps', String(steps), '--interval', '20']);
time(`predict ${nFrames} frames`, 'predict.ts', ['--in', join(dir, 'labeled.xyz'), '--model', join(dir, 'models'), '--out', join(dir, 'pred.xyz')]);
await rm(dir, { recursive: true, force: true });
