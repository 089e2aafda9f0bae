/**
 * Starting structures of the argon demo.
 *   --kind fcc:    an fcc crystal of n x n x n cubic cells (4 n^3 atoms; n = 2 gives 32, n = 3 gives 108),
 *                  lattice constant a = sqrt(2) * 1.0902 sigma = 5.250 Å (the LJ equilibrium spacing,
 *                  from Kittel's lattice sums) unless --lattice-constant is given.
 *   --kind liquid: the same lattice at liquid density (default 1.40 g/cm^3, about liquid argon near its
 *                  normal boiling point; NIST Chemistry WebBook, from memory), melted with the reference
 *                  LJ potential (Langevin at --melt-temperature), then held at --temperature; written with velocities.
 *
 *   npx tsx examples/argon/make-start.ts --kind fcc --cells 2 --out examples/argon/start-fcc.xyz
 */
import { writeFrames } from '../../src/atoms/xyz/writer.js';
import { num, runProgram, str, optNum, type ProgramSpec } from './lib/cli.js';
import { fccCrystal, ljFccLatticeConstant } from './lib/lattice.js';
import { ARGON_SIGMA, argonLj } from './lib/lj.js';
import { meltedLiquid } from './lib/start.js';

const spec: ProgramSpec = {
  name: 'make-start',
  summary: 'write a starting structure: fcc argon crystal or a melted liquid-like configuration',
  inputs: [],
  outputs: [{ name: 'start', flag: 'out', help: 'extended XYZ with one frame' }],
  params: [
    { name: 'kind', type: 'string', default: 'fcc', choices: ['fcc', 'liquid'], help: 'crystal or melted liquid' },
    { name: 'cells', type: 'integer', default: 2, help: 'conventional cubic cells per axis (4 n^3 atoms)' },
    { name: 'lattice_constant', type: 'number', help: 'fcc lattice constant (Å); default the LJ equilibrium 5.250 Å' },
    { name: 'density', type: 'number', default: 1.4, help: 'liquid mass density (g/cm^3)' },
    { name: 'melt_temperature', type: 'number', default: 250, help: 'melting temperature for --kind liquid (K)' },
    { name: 'melt_steps', type: 'integer', default: 2000, help: 'melting steps' },
    { name: 'temperature', type: 'number', default: 100, help: 'final temperature for --kind liquid (K)' },
    { name: 'cool_steps', type: 'integer', default: 2000, help: 'steps at the final temperature' },
    { name: 'timestep', aliases: ['dt'], type: 'number', default: 5, help: 'time step (fs)' },
  ],
};

await runProgram(spec, async (r) => {
  const kind = str(r, 'kind');
  const n = num(r, 'cells');
  const frame =
    kind === 'fcc'
      ? fccCrystal('Ar', optNum(r, 'lattice_constant') ?? ljFccLatticeConstant(ARGON_SIGMA), n)
      : meltedLiquid({
          symbol: 'Ar',
          cells: n,
          density: num(r, 'density'),
          meltTemperature: num(r, 'melt_temperature'),
          meltSteps: num(r, 'melt_steps'),
          temperature: num(r, 'temperature'),
          coolSteps: num(r, 'cool_steps'),
          dt: num(r, 'timestep'),
          seed: r.seed,
          lj: argonLj(),
        });
  frame.info.set('structure', kind);
  const path = r.outputs.start as string;
  await writeFrames(path, [frame]);
  process.stdout.write(`make-start: ${kind} argon, ${frame.species.length} atoms -> ${path}\n`);
});
