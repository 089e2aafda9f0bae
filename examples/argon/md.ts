/**
 * MD of the argon demo: Langevin (BAOAB) or constant-energy velocity Verlet, driven by the committee's
 * mean force (or one member's, --drive M), writing extended XYZ every `write_every` steps with info
 * step, time (fs), energy (driving potential energy, eV), total_energy (eV), temperature (K),
 * energy_<m> (each member's energy, eV) and per-atom velocities (Å/fs), forces (driving, eV/Å) and
 * forces_0 ... forces_{M-1} (each member's forces, eV/Å).
 * Stops early, and still writes what it has, when atoms come closer than --min-distance or anything
 * goes non-finite; the last frame then carries info stopped="contact" or "non_finite".
 *
 *   npx tsx examples/argon/md.ts --start start.xyz --model m0.json --model m1.json --out traj.xyz --temperature 60 --steps 2000
 * or, run by the engine, with RATCHET_TASK_JSON (inputs.start and inputs.models|model_<m> -> outputs.trajectory).
 */
import { writeFile } from 'node:fs/promises';
import { writeFrames } from '../../src/atoms/xyz/writer.js';
import { massesOf } from '../../src/atoms/elements.js';
import { realArray, type Frame } from '../../src/atoms/frame.js';
import { num, runProgram, str, UsageError, type ProgramSpec } from './lib/cli.js';
import { committeeForces, loadCommittee, parseDrive } from './lib/committee.js';
import { maxwellBoltzmann, removeDrift, runMd, type FrameSnapshot } from './lib/dynamics.js';
import { bareCopy, readAll, realColumn, requirePeriodicOrFree } from './lib/frames.js';
import type { CommitteeResult } from './lib/model.js';
import { createRandom } from './lib/random.js';

const spec: ProgramSpec = {
  name: 'md',
  summary: 'molecular dynamics driven by a committee of pair models, writing every member\'s forces',
  inputs: [
    { name: 'start', aliases: ['structure', 'structures', 'start_structure', 'frames'], flag: 'start', help: 'extended XYZ starting structure(s)' },
    { name: 'models', aliases: ['committee', 'model'], pattern: /^model_\d+$/, flag: 'model', multiple: true, help: 'model JSON files or a directory of them (member order = natural file order)' },
  ],
  outputs: [
    { name: 'trajectory', aliases: ['traj'], flag: 'out', help: 'extended XYZ trajectory' },
    { name: 'summary', flag: 'summary', required: false, help: 'optional JSON summary of the run' },
  ],
  params: [
    { name: 'temperature', type: 'number', default: 60, help: 'thermostat / initial temperature (K)' },
    { name: 'steps', type: 'integer', default: 1000, help: 'production steps' },
    { name: 'timestep', aliases: ['dt'], type: 'number', default: 5, help: 'time step (fs)' },
    { name: 'write_every', aliases: ['interval'], type: 'integer', default: 10, help: 'write a frame every this many steps' },
    { name: 'ensemble', type: 'string', default: 'nvt', choices: ['nvt', 'nve'], help: 'nvt = Langevin thermostat, nve = constant energy' },
    { name: 'friction', type: 'number', default: 0.01, help: 'Langevin friction gamma (1/fs) in nvt' },
    { name: 'equilibration_steps', type: 'integer', default: 0, help: 'Langevin steps before production (not written)' },
    { name: 'min_distance', type: 'number', default: 2.5, help: 'stop when two atoms come closer than this (Å); 2.5 Å is about 0.73 sigma, where LJ argon costs 1.4 eV per pair' },
    { name: 'start_frame', type: 'integer', default: -1, help: 'which frame of the start file (negative counts from the end)' },
    { name: 'velocities', type: 'string', default: 'maxwell', choices: ['maxwell', 'frame'], help: 'initial velocities: Maxwell-Boltzmann at the temperature, or the start frame\'s velocities array' },
    { name: 'drive', type: 'string', default: 'mean', help: "driving force: 'mean' of the committee or a member index" },
    { name: 'pressure', type: 'number', help: 'not supported: this demo MD keeps the volume fixed' },
  ],
};

await runProgram(spec, async (r) => {
  const t0 = performance.now();
  if (r.params.pressure !== undefined) throw new UsageError('md: pressure is not supported (constant-volume MD only); remove params.pressure / --pressure');
  const temperature = num(r, 'temperature');
  if (!(temperature >= 0)) throw new UsageError(`md: temperature must be >= 0 K, got ${temperature}`);
  const ensemble = str(r, 'ensemble');
  const { files, models } = await loadCommittee(r.inputs.models);
  const startFile = r.inputs.start[0];
  const starts = await readAll([startFile], ['velocities']);
  if (starts.length === 0) throw new UsageError(`${startFile}: expected at least one frame, found none`);
  const k = num(r, 'start_frame');
  const pick = k < 0 ? starts.length + k : k;
  if (pick < 0 || pick >= starts.length) throw new UsageError(`md: start_frame ${k} is outside ${startFile} (${starts.length} frames)`);
  const { frame: start, file, index } = starts[pick];
  requirePeriodicOrFree(start, file, index);
  const rng = createRandom(r.seed);
  const masses = massesOf(start.species);
  let velocities: Float64Array;
  if (str(r, 'velocities') === 'frame') {
    const v = realArray(start, 'velocities', 3);
    if (!v) throw new UsageError(`${file}: frame ${index}: velocities=frame but the frame has no per-atom 'velocities' array of width 3`);
    velocities = Float64Array.from(v);
    if (ensemble === 'nve') removeDrift(velocities, masses);
  } else velocities = maxwellBoltzmann(masses, temperature, rng);
  const drive = parseDrive(str(r, 'drive'), models.length);
  const sys = { positions: Float64Array.from(start.positions), velocities, masses, cell: start.cell, pbc: start.pbc };
  const compute = committeeForces(models, start.species, start.cell, start.pbc, drive);
  const frames: Frame[] = [];
  const toFrame = (s: FrameSnapshot<CommitteeResult>): Frame => {
    const f = bareCopy(start);
    f.positions = Float64Array.from(s.positions);
    f.info.set('step', s.step);
    f.info.set('time', s.time);
    f.info.set('energy', s.result.energy);
    f.info.set('total_energy', s.result.energy + s.kinetic);
    f.info.set('temperature', s.temperature);
    const c = s.result.extra as CommitteeResult;
    c.energies.forEach((e, m) => f.info.set(`energy_${m}`, e));
    if (s.stopped) f.info.set('stopped', s.stopped);
    f.arrays.set('velocities', realColumn(Float64Array.from(s.velocities)));
    f.arrays.set('forces', realColumn(Float64Array.from(s.result.forces)));
    c.forces.forEach((fm, m) => f.arrays.set(`forces_${m}`, realColumn(Float64Array.from(fm))));
    return f;
  };
  const summary = runMd(
    sys,
    compute,
    {
      dt: num(r, 'timestep'),
      steps: num(r, 'steps'),
      interval: num(r, 'write_every'),
      temperature,
      friction: ensemble === 'nve' ? 0 : num(r, 'friction'),
      equilibrationSteps: num(r, 'equilibration_steps'),
      equilibrationFriction: num(r, 'friction'),
      minDistance: num(r, 'min_distance'),
      rng,
    },
    (s) => frames.push(toFrame(s)),
  );
  const path = r.outputs.trajectory as string;
  await writeFrames(path, frames);
  const seconds = (performance.now() - t0) / 1000;
  const record = {
    reason: summary.reason,
    steps: summary.steps,
    stop_step: summary.stopStep ?? null,
    frames: summary.frames,
    mean_temperature_K: summary.meanTemperature,
    ensemble,
    temperature_K: temperature,
    dt_fs: num(r, 'timestep'),
    models: files,
    drive: drive === 'mean' ? 'mean' : `member ${drive}`,
    seconds,
  };
  if (r.outputs.summary) await writeFile(r.outputs.summary, JSON.stringify(record, null, 1) + '\n');
  const how = summary.reason === 'completed' ? 'completed' : `STOPPED at step ${summary.stopStep} (${summary.reason === 'contact' ? `atoms closer than ${num(r, 'min_distance')} Å` : 'non-finite values'})`;
  process.stdout.write(
    `md: ${ensemble} ${temperature} K, ${summary.steps} steps of ${num(r, 'timestep')} fs with ${models.length} models: ${how}; ` +
      `mean T ${summary.meanTemperature.toFixed(1)} K, ${summary.frames} frames in ${seconds.toFixed(2)} s -> ${path}\n`,
  );
});
