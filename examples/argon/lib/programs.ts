/**
 * The bodies of the MD and prediction programs, shared by md.ts, predict.ts and validate.ts
 * (the entry scripts only declare their inputs, outputs and parameters).
 */
import { writeFile } from 'node:fs/promises';
import { massesOf } from '../../../src/atoms/elements.js';
import { realArray, type Frame } from '../../../src/atoms/frame.js';
import { writeFrames } from '../../../src/atoms/xyz/writer.js';
import { num, str, UsageError, type IoSpec, type ParamSpec, type Resolved } from './cli.js';
import { committeeForces, loadCommittee, parseDrive } from './committee.js';
import { maxwellBoltzmann, removeDrift, runMd, type FrameSnapshot } from './dynamics.js';
import { bareCopy, readAll, realColumn, requirePeriodicOrFree } from './frames.js';
import type { CommitteeResult } from './model.js';
import { predictFrame } from './predict.js';
import { createRandom } from './random.js';

/** The committee: model_0, model_1 ... (the engine's names), or models/committee/model as files or a directory. */
export const MODELS_INPUT: IoSpec = {
  name: 'models',
  aliases: ['committee', 'model'],
  pattern: /^model_\d+$/,
  flag: 'model',
  multiple: true,
  help: 'model files (JSON) or a directory of *.json; member order = natural order of the names',
};

export const START_INPUT: IoSpec = {
  name: 'start',
  aliases: ['structure', 'structures', 'start_structure'],
  flag: 'start',
  help: 'extended XYZ starting structure (the last frame unless start_frame says otherwise)',
};

export const MD_PARAMS: ParamSpec[] = [
  { name: 'temperature', type: 'number', default: 60, help: 'thermostat / initial temperature (K)' },
  { name: 'steps', type: 'integer', default: 1000, help: 'production steps' },
  { name: 'timestep', aliases: ['dt'], type: 'number', default: 5, help: 'time step (fs)' },
  { name: 'write_every', aliases: ['interval'], type: 'integer', default: 10, help: 'write a frame every this many steps' },
  { name: 'friction', type: 'number', default: 0.01, help: 'Langevin friction gamma (1/fs)' },
  { name: 'equilibration_steps', type: 'integer', default: 0, help: 'Langevin steps before production (not written)' },
  { name: 'min_distance', type: 'number', default: 2.5, help: 'stop when two atoms come closer than this (Å); 2.5 Å is about 0.73 sigma, where LJ argon costs 1.4 eV per pair' },
  { name: 'start_frame', type: 'integer', default: -1, help: 'which frame of the start file (negative counts from the end)' },
  { name: 'velocities', type: 'string', default: 'maxwell', choices: ['maxwell', 'frame'], help: "initial velocities: Maxwell-Boltzmann at the temperature, or the start frame's velocities array" },
  { name: 'drive', type: 'string', default: 'mean', help: "driving force: 'mean' of the committee or a member index" },
  { name: 'pressure', type: 'number', help: 'not supported: this demo MD keeps the volume fixed' },
];

/**
 * Runs MD as the parameters say and writes the trajectory (and an optional JSON summary).
 * ensemble: 'nvt' (Langevin) or 'nve' (velocity Verlet; any equilibration is Langevin).
 */
export async function mdMain(r: Resolved, ensemble: 'nvt' | 'nve', trajectory: string, summaryPath?: string): Promise<string> {
  const t0 = performance.now();
  if (r.params.pressure !== undefined) throw new UsageError('md: pressure is not supported (constant-volume MD only); remove params.pressure / --pressure');
  const temperature = num(r, 'temperature');
  if (!(temperature >= 0)) throw new UsageError(`md: temperature must be >= 0 K, got ${temperature}`);
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
  const dt = num(r, 'timestep');
  const summary = runMd(
    sys,
    compute,
    {
      dt,
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
  await writeFrames(trajectory, frames);
  const seconds = (performance.now() - t0) / 1000;
  if (summaryPath) {
    const record = {
      reason: summary.reason,
      steps: summary.steps,
      stop_step: summary.stopStep ?? null,
      frames: summary.frames,
      mean_temperature_K: summary.meanTemperature,
      ensemble,
      temperature_K: temperature,
      timestep_fs: dt,
      models: files,
      drive: drive === 'mean' ? 'mean' : `member ${drive}`,
      seconds,
    };
    await writeFile(summaryPath, JSON.stringify(record, null, 1) + '\n');
  }
  const how =
    summary.reason === 'completed'
      ? 'completed'
      : `STOPPED at step ${summary.stopStep} (${summary.reason === 'contact' ? `atoms closer than ${num(r, 'min_distance')} Å` : 'non-finite values'})`;
  return (
    `md: ${ensemble} ${temperature} K, ${summary.steps} steps of ${dt} fs with ${models.length} models: ${how}; ` +
    `mean T ${summary.meanTemperature.toFixed(1)} K, ${summary.frames} frames in ${seconds.toFixed(2)} s -> ${trajectory}`
  );
}

/** Committee predictions on every frame of the inputs, written in order. */
export async function predictMain(r: Resolved, inputs: string[], out: string): Promise<string> {
  const t0 = performance.now();
  const { models } = await loadCommittee(r.inputs.models);
  const items = await readAll(inputs, []);
  const frames = items.map(({ frame, file, index }) => {
    requirePeriodicOrFree(frame, file, index);
    return predictFrame(frame, models);
  });
  await writeFrames(out, frames);
  return `predict: ${frames.length} frames with ${models.length} models in ${((performance.now() - t0) / 1000).toFixed(2)} s -> ${out}`;
}
