/**
 * MD of the argon demo (the simulate stage): Langevin (BAOAB) or constant-energy velocity Verlet,
 * driven by the committee's mean force (or one member's, --drive M), writing extended XYZ every
 * `write_every` steps with info step, time (fs), energy (driving potential energy, eV), total_energy
 * (eV), temperature (K), energy_<m> (each member's energy, eV) and per-atom velocities (Å/fs), forces
 * (driving, eV/Å) and forces_0 ... forces_{M-1} (each member's forces, eV/Å).
 * Stops early, and still writes what it has, when atoms come closer than --min-distance or anything
 * goes non-finite; the last frame then carries info stopped="contact" or "non_finite".
 *
 *   npx tsx examples/argon/md.ts --start start.xyz --model m0.json --model m1.json --out traj.xyz --temperature 60 --steps 2000
 * or, run by the engine, with RATCHET_TASK_JSON (inputs start and model_0 ... -> outputs.trajectory).
 */
import { runProgram, str, type ProgramSpec } from './lib/cli.js';
import { MD_PARAMS, MODELS_INPUT, START_INPUT, mdMain } from './lib/programs.js';

const spec: ProgramSpec = {
  name: 'md',
  summary: "molecular dynamics driven by a committee of pair models, writing every member's forces",
  inputs: [START_INPUT, MODELS_INPUT],
  outputs: [
    { name: 'trajectory', aliases: ['traj'], flag: 'out', help: 'extended XYZ trajectory' },
    { name: 'summary', flag: 'summary', required: false, help: 'optional JSON summary of the run' },
  ],
  params: [{ name: 'ensemble', type: 'string', default: 'nvt', choices: ['nvt', 'nve'], help: 'nvt = Langevin thermostat, nve = constant energy' }, ...MD_PARAMS],
};

await runProgram(spec, async (r) => {
  const line = await mdMain(r, str(r, 'ensemble') as 'nvt' | 'nve', r.outputs.trajectory as string, r.outputs.summary);
  process.stdout.write(line + '\n');
});
