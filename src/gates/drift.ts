/**
 * drift: is total energy conserved along a molecular dynamics run?
 *
 * Total energy per atom against time, from extended XYZ info (`total_energy`, or `energy` plus the kinetic energy
 * from `velocities` and masses, or from ASE's `momenta`) or from a thermo table. Figures: least-squares slope
 * (meV/atom/ps) with its ordinary least-squares standard error, standard deviation (meV/atom), largest
 * |E(t) - E(0)| (meV/atom), mean temperature from the velocities by equipartition, how many frames over how long.
 * Verdict: too few frames or too short a run fails (no slope can be trusted); |slope| above the fail limit fails;
 * above the warn limit it warns only when it is also more than 2 standard errors from zero.
 * A run that blew up (non-finite energy, positions, velocities or forces) fails, naming the first bad frame;
 * figures then cover the frames before it.
 *
 * Only meaningful for a run whose total energy should be conserved (NVE). For a thermostatted run point it at the
 * thermostat's conserved quantity (e.g. a thermo column holding it) or read only the blow-up part of the verdict.
 */
import { massesOf } from '../atoms/elements.js';
import { kineticEnergy, momentaToVelocities, temperatureFromKinetic, ASE_TIME_UNIT_FS } from '../atoms/units.js';
import { open } from 'node:fs/promises';
import type { Frame } from '../atoms/frame.js';
import { firstNonFinite, frameLabel, infoNumber, mapFiles, defaultWorkers } from './frames.js';
import { findColumn, readThermoTable, type ThermoTable } from './thermo.js';
import { GateInputError, type FileSpan, type GateResult } from './types.js';
import { Judgement, fmt } from './verdict.js';
import { DRIFT_DEFAULTS } from './defaults.js';
import { DRIFT_LIMIT_NAMES, resolveLimits, type DriftLimitName, type DriftLimits, type LimitInput } from './limits.js';

export { DRIFT_DEFAULTS };

/** Where each frame's numbers are (extended XYZ keys). */
export interface DriftFrameOptions {
  /** Info key of the total energy in eV (default total_energy). */
  totalKey?: string;
  /** Info key of the potential energy in eV (default energy). */
  energyKey?: string;
  /**
   * Per-atom array of velocities in Å/fs (default velocities). `momenta` (ASE's per-atom momenta, u·Å per ASE time
   * unit) is converted to velocities; with the default key a frame without velocities but with momenta uses them.
   */
  velocitiesKey?: string;
  /** Per-atom array of masses in amu; standard atomic weights when absent (default masses). */
  massesKey?: string;
  /** Per-atom array of forces checked for non-finite values when present (default forces). */
  forcesKey?: string;
  /** Info key of the time in fs (default time). */
  timeKey?: string;
  /** Info key of the MD step number (default step), used with a time step when there is no time. */
  stepKey?: string;
  /** Info key of a temperature in K, used for the mean when there are no velocities (default temperature). */
  temperatureKey?: string;
  /** auto: total_energy when the frame has it, else energy + kinetic; or force one of them. */
  source?: 'auto' | 'total' | 'kinetic';
}

export interface DriftOptions extends DriftFrameOptions {
  /** MD time step in fs: time = step x timestep, or frame index x timestep when frames carry no step number. */
  timestep?: number;
  /** Degrees of freedom for the temperature (default 3N - 3: centre-of-mass motion removed; see defaultDof). */
  dof?: number;
  /** Warn/fail limits by their table names (max_drift, max_excursion); a number is the fail limit. */
  limits?: Partial<Record<DriftLimitName, LimitInput>>;
  /** Names the limit keys in messages about bad limits (default "max_drift.warn"). */
  limitName?: (name: DriftLimitName, which: 'warn' | 'fail') => string;
  /** Fewer usable frames than this fails (default 10, at least 3). */
  minFrames?: number;
  /** A run shorter than this, ps, fails (default 1). */
  minSpan?: number;
  /** Input kind; auto decides by file extension (.csv .tsv .dat .txt .log .thermo are tables) or first line. */
  format?: 'auto' | 'xyz' | 'table';
  /** Thermo tables: number of atoms (tables do not say). Give 1 when the energy column is already per atom. */
  atoms?: number;
  /** Thermo tables: column names (defaults: time/time_fs/t, step, total_energy/etot/toteng/etotal/e_tot, temperature/temp). */
  timeColumn?: string;
  stepColumn?: string;
  energyColumn?: string;
  temperatureColumn?: string;
  /** Thermo tables: unit of the time column (default fs). */
  timeUnit?: 'fs' | 'ps';
  /** Worker threads for reading extended XYZ (default min(2, cpus)). */
  workers?: number;
}

/** What one frame contributes (small and clonable: this is what mapFrames returns from a worker). */
export interface DriftSample {
  atoms: number;
  periodic: boolean;
  /** Total energy in eV (not per atom), null when the frame cannot give one. */
  total: number | null;
  source: 'total_energy' | 'energy+kinetic' | null;
  /** Kinetic energy in eV from the velocities, null without velocities. */
  kinetic: number | null;
  /** Where the velocities came from: the per-atom key, and whether it held ASE momenta; null without. */
  velocities: { key: string; momenta: boolean } | null;
  /** Temperature from the info, K (used only without velocities). */
  temperature: number | null;
  /** Time in fs from the info, or null. */
  time: number | null;
  /** Step number from the info, or null. */
  step: number | null;
  /** Why the frame shows a blown-up run ("non-finite positions (atom 3)"), or null. */
  bad: string | null;
  /** Why the frame cannot give a total energy (missing key...), or null. */
  missing: string | null;
}

/**
 * Default degrees of freedom for the temperature: 3N - 3, for periodic cells and clusters alike, since MD programs
 * remove the centre-of-mass motion (ASE's Stationary, LAMMPS' velocity ... mom yes) and total momentum is
 * conserved from then on. A cluster whose rotation is also removed has 3N - 6 (3N - 5 if linear): give it.
 * A single atom keeps 3.
 */
export function defaultDof(atoms: number, _periodic = false): number {
  return defaultDofRule(atoms).dof;
}

/** defaultDof with the words of its rule (the drift figure `dof_rule`). */
export function defaultDofRule(atoms: number): { dof: number; rule: string } {
  if (atoms <= 1) return { dof: 3 * atoms, rule: '3N (a single atom)' };
  return { dof: 3 * atoms - 3, rule: '3N - 3 (centre-of-mass motion removed)' };
}

/** A mean temperature above this (K) from velocities is almost surely a unit error. */
export const UNPHYSICAL_TEMPERATURE_K = 1e5;

function realColumn(frame: Frame, key: string, width: number): Float64Array | undefined | 'wrong' {
  const col = frame.arrays.get(key);
  if (!col) return undefined;
  if (col.type !== 'R' && col.type !== 'I') return 'wrong';
  if (col.width !== width) return 'wrong';
  return col.values as Float64Array;
}

/** The per-frame part of the drift gate (pure; what mapFrames runs on each frame). */
export function driftFrame(frame: Frame, _index: number, options: DriftFrameOptions = {}): DriftSample {
  const o = {
    totalKey: options.totalKey ?? 'total_energy',
    energyKey: options.energyKey ?? 'energy',
    velocitiesKey: options.velocitiesKey ?? 'velocities',
    massesKey: options.massesKey ?? 'masses',
    forcesKey: options.forcesKey ?? 'forces',
    timeKey: options.timeKey ?? 'time',
    stepKey: options.stepKey ?? 'step',
    temperatureKey: options.temperatureKey ?? 'temperature',
    source: options.source ?? 'auto',
  };
  const n = frame.species.length;
  const s: DriftSample = {
    atoms: n,
    periodic: frame.pbc.some(Boolean),
    total: null,
    source: null,
    kinetic: null,
    velocities: null,
    temperature: infoNumber(frame.info, o.temperatureKey) ?? null,
    time: infoNumber(frame.info, o.timeKey) ?? null,
    step: infoNumber(frame.info, o.stepKey) ?? null,
    bad: null,
    missing: null,
  };
  const badAtom = (what: string, values: ArrayLike<number>, width: number): boolean => {
    const k = firstNonFinite(values);
    if (k < 0) return false;
    s.bad = `non-finite ${what} (atom ${Math.floor(k / width)})`;
    return true;
  };
  if (badAtom('positions', frame.positions, 3)) return s;
  const forces = realColumn(frame, o.forcesKey, 3);
  if (forces instanceof Float64Array && badAtom(o.forcesKey, forces, 3)) return s;
  let velKey = o.velocitiesKey;
  // ASE writes momenta (u Å per ASE time unit), not velocities: use them when asked, or when there are no velocities.
  if (velKey === 'velocities' && !frame.arrays.has(velKey) && frame.arrays.has('momenta')) velKey = 'momenta';
  const momenta = velKey === 'momenta';
  const vel = realColumn(frame, velKey, 3);
  if (vel === 'wrong') {
    s.missing = `per-atom '${velKey}' is not a real column of width 3`;
    return s;
  }
  if (vel && badAtom(velKey, vel, 3)) return s;
  if (vel) {
    const masses = realColumn(frame, o.massesKey, 1);
    let m: ArrayLike<number>;
    if (masses instanceof Float64Array) m = masses;
    else {
      try {
        m = massesOf(frame.species);
      } catch (err) {
        s.missing = `${(err as Error).message}; give per-atom '${o.massesKey}' (amu) for the kinetic energy`;
        return s;
      }
    }
    s.kinetic = kineticEnergy(m, momenta ? momentaToVelocities(m, vel) : vel);
    s.velocities = { key: velKey, momenta };
  }
  const total = infoNumber(frame.info, o.totalKey);
  const pot = infoNumber(frame.info, o.energyKey);
  if (o.source !== 'kinetic' && total !== undefined) {
    s.total = total;
    s.source = 'total_energy';
  } else if (o.source !== 'total' && pot !== undefined && s.kinetic !== null) {
    s.total = pot + s.kinetic;
    s.source = 'energy+kinetic';
  } else {
    s.missing =
      o.source === 'total'
        ? `no '${o.totalKey}' in the frame info`
        : o.source === 'kinetic'
          ? pot === undefined
            ? `no '${o.energyKey}' in the frame info`
            : `no per-atom '${o.velocitiesKey}' to add the kinetic energy`
          : `neither '${o.totalKey}' nor '${o.energyKey}' with per-atom '${o.velocitiesKey}'${o.velocitiesKey === 'velocities' ? " (or ASE's 'momenta')" : ''}`;
    return s;
  }
  if (!Number.isFinite(s.total)) s.bad = `non-finite total energy (${s.total})`;
  return s;
}

export interface DriftFigures {
  frames: number;
  atoms: number;
  slope_meV_per_atom_per_ps: number | null;
  /**
   * Ordinary least-squares standard error of the slope (needs 3 frames). MD energies are autocorrelated, so this
   * is a lower bound on the true uncertainty.
   */
  slope_se_meV_per_atom_per_ps: number | null;
  std_meV_per_atom: number | null;
  max_excursion_meV_per_atom: number | null;
  mean_temperature_K: number | null;
  /** Frames before the first bad one (all frames for a clean run): what the figures are computed over. */
  frames_used: number;
  first_bad_frame: number | null;
  duration_ps: number | null;
  initial_energy_eV_per_atom: number | null;
  energy_source: string | null;
  time_source: string | null;
  /** Per-atom key the velocities came from ("momenta": ASE momenta converted), null without velocities. */
  velocities_source: string | null;
  /** Degrees of freedom of the temperature and the rule that gave them, null without velocities. */
  dof: number | null;
  dof_rule: string | null;
  files: FileSpan[];
  /** The limits in force (limits.ts names; null = not checked). */
  limits: DriftLimits;
  /** Fewer usable frames, or a shorter run (ps), fails. */
  sample_limits: { min_frames: number; min_span_ps: number };
}

/**
 * Least-squares slope with its ordinary least-squares standard error (sqrt(SSR / (n - 2) / Σ(t - t̄)²), n >= 3),
 * population standard deviation and largest excursion from the first value.
 */
export function seriesFigures(timeFs: ArrayLike<number>, ePerAtomEv: ArrayLike<number>): {
  slope_meV_per_atom_per_ps: number | null;
  slope_se_meV_per_atom_per_ps: number | null;
  std_meV_per_atom: number | null;
  max_excursion_meV_per_atom: number | null;
} {
  const n = Math.min(timeFs.length, ePerAtomEv.length);
  if (n === 0) return { slope_meV_per_atom_per_ps: null, slope_se_meV_per_atom_per_ps: null, std_meV_per_atom: null, max_excursion_meV_per_atom: null };
  let tm = 0;
  let em = 0;
  for (let k = 0; k < n; k++) {
    tm += timeFs[k];
    em += ePerAtomEv[k];
  }
  tm /= n;
  em /= n;
  let stt = 0;
  let ste = 0;
  let see = 0;
  let exc = 0;
  const e0 = ePerAtomEv[0];
  for (let k = 0; k < n; k++) {
    const dt = timeFs[k] - tm;
    const de = ePerAtomEv[k] - em;
    stt += dt * dt;
    ste += dt * de;
    see += de * de;
    exc = Math.max(exc, Math.abs(ePerAtomEv[k] - e0));
  }
  // eV/atom/fs -> meV/atom/ps: x 1000 (meV per eV) x 1000 (fs per ps)
  const b = n >= 2 && stt > 0 ? ste / stt : null;
  let se: number | null = null;
  if (b !== null && n >= 3) {
    let ssr = 0;
    for (let k = 0; k < n; k++) {
      const r = ePerAtomEv[k] - em - b * (timeFs[k] - tm);
      ssr += r * r;
    }
    se = Math.sqrt(ssr / (n - 2) / stt) * 1e6;
  }
  return {
    slope_meV_per_atom_per_ps: b === null ? null : b * 1e6,
    slope_se_meV_per_atom_per_ps: se,
    std_meV_per_atom: Math.sqrt(see / n) * 1e3,
    max_excursion_meV_per_atom: exc * 1e3,
  };
}

/** One point of the series the figures are made from, whatever the source. */
export interface DriftPoint {
  timeFs: number;
  totalEv: number;
  temperature: number | null;
}

interface SeriesInput {
  frames: number;
  atoms: number;
  points: DriftPoint[];
  firstBad: { index: number; what: string } | null;
  energySource: string | null;
  timeSource: string | null;
  velocitiesSource: string | null;
  dof: { dof: number; rule: string } | null;
  /** Where the temperature came from when it came from velocities (for the unit-error message). */
  files: FileSpan[];
}

/** Limits and sample sizes in force, checked (bad values are bad input). */
function driftSettings(options: DriftOptions): { limits: DriftLimits; minFrames: number; minSpan: number } {
  const limits = resolveLimits(DRIFT_LIMIT_NAMES, options.limits, options.limitName);
  const minFrames = options.minFrames ?? DRIFT_DEFAULTS.minFrames;
  const minSpan = options.minSpan ?? DRIFT_DEFAULTS.minSpan;
  if (!(Number.isInteger(minFrames) && minFrames >= 3))
    throw new GateInputError(`minimum number of frames (drift_min_frames, --drift-min-frames): expected a whole number of at least 3 (a slope and its standard error need 3), found ${minFrames}`);
  if (!(Number.isFinite(minSpan) && minSpan >= 0))
    throw new GateInputError(`minimum run length (drift_min_span, --drift-min-span): expected a number of ps of at least 0, found ${minSpan}`);
  return { limits, minFrames, minSpan };
}

function judge(input: SeriesInput, options: DriftOptions): GateResult<DriftFigures> {
  const { limits, minFrames, minSpan } = driftSettings(options);
  const { points } = input;
  const t = Float64Array.from(points, (p) => p.timeFs);
  const e = Float64Array.from(points, (p) => p.totalEv / input.atoms);
  const stats = seriesFigures(t, e);
  const temps = points.map((p) => p.temperature).filter((x): x is number => x !== null && Number.isFinite(x));
  const figures: DriftFigures = {
    frames: input.frames,
    atoms: input.atoms,
    ...stats,
    mean_temperature_K: temps.length ? temps.reduce((a, b) => a + b, 0) / temps.length : null,
    frames_used: points.length,
    first_bad_frame: input.firstBad ? input.firstBad.index : null,
    duration_ps: points.length ? (t[t.length - 1] - t[0]) / 1000 : null,
    initial_energy_eV_per_atom: points.length ? e[0] : null,
    energy_source: input.energySource,
    time_source: input.timeSource,
    velocities_source: input.velocitiesSource,
    dof: input.dof?.dof ?? null,
    dof_rule: input.dof?.rule ?? null,
    files: input.files,
    limits,
    sample_limits: { min_frames: minFrames, min_span_ps: minSpan },
  };
  const j = new Judgement();
  if (input.frames === 0) j.fail('no frames to check');
  if (input.firstBad)
    j.fail(
      `the run blew up: ${frameLabel(input.firstBad.index, input.files)} has ${input.firstBad.what}; figures cover the ${points.length} frame(s) before it`,
    );
  const span = figures.duration_ps ?? 0;
  const fewFrames = points.length < minFrames;
  // A run of exactly the minimum length may carry rounding in its times.
  const short = span < minSpan * (1 - 1e-9);
  if (input.frames > 0 && !input.firstBad && (fewFrames || short))
    j.fail(
      `${points.length} usable frame${points.length === 1 ? '' : 's'} over ${fmt(span)} ps: too ${fewFrames ? 'few' : 'short'} to judge the drift (at least ${minFrames} frames over at least ${fmt(minSpan)} ps needed)`,
    );
  else if (stats.slope_meV_per_atom_per_ps === null && points.length >= 2) j.fail('all frames have the same time: no slope');
  const slope = stats.slope_meV_per_atom_per_ps;
  const se = stats.slope_se_meV_per_atom_per_ps;
  const pm = (x: number) => `${fmt(x)}${se !== null ? ` ± ${fmt(se, 2)}` : ''} meV/atom/ps`;
  if (slope !== null && !(fewFrames || short)) {
    const a = Math.abs(slope);
    const { warn, fail } = limits.max_drift;
    if (fail !== null && a > fail) j.fail(`energy drifts by ${pm(slope)}: above the fail limit ${fmt(fail)} meV/atom/ps in magnitude`);
    else if (warn !== null && a > warn) {
      if (se !== null && a <= 2 * se)
        j.note(`energy drift ${pm(slope)} is above the warn limit ${fmt(warn)} meV/atom/ps but within 2 standard errors of zero: not distinguishable from no drift`);
      else j.warn(`energy drifts by ${pm(slope)}: above the warn limit ${fmt(warn)} meV/atom/ps in magnitude and more than 2 standard errors from zero`);
    }
  }
  const exc = stats.max_excursion_meV_per_atom;
  const xl = limits.max_excursion;
  if (exc !== null && points.length >= 2)
    j.limit(exc, xl.warn ?? undefined, xl.fail ?? undefined, (kind, lim) =>
      `total energy strays up to ${fmt(exc)} meV/atom from its start (${kind} limit ${fmt(lim)} meV/atom)`,
    );
  const T = figures.mean_temperature_K;
  if (T !== null && input.velocitiesSource !== null && T > UNPHYSICAL_TEMPERATURE_K)
    j.fail(
      `mean temperature ${fmt(T)} K from per-atom '${input.velocitiesSource}' is not physical (above ${fmt(UNPHYSICAL_TEMPERATURE_K)} K): the velocities are almost surely in another unit than Å/fs` +
        (input.velocitiesSource === 'momenta' ? '' : ` (ASE writes momenta in u·Å per its time unit of ${fmt(ASE_TIME_UNIT_FS, 6)} fs: name them 'momenta' to have them converted)`),
    );
  if (j.verdict === 'pass' && slope !== null && !(fewFrames || short))
    j.note(`energy drift ${pm(slope)} over ${fmt(span)} ps (${points.length} frames)`);
  return { gate: 'drift', verdict: j.verdict, reasons: j.reasons, figures };
}

/** Combine per-frame samples (global frame order) into the drift verdict. Throws GateInputError for unusable input. */
export function summarizeDrift(samples: DriftSample[], options: DriftOptions = {}, files: FileSpan[] = []): GateResult<DriftFigures> {
  const points: DriftPoint[] = [];
  let firstBad: SeriesInput['firstBad'] = null;
  const atoms = samples.length ? samples[0].atoms : 0;
  const dofFor = options.dof !== undefined ? { dof: options.dof, rule: 'given' } : defaultDofRule(atoms);
  const dof = dofFor.dof;
  driftSettings(options);
  if (options.dof !== undefined && !(options.dof > 0)) throw new GateInputError(`degrees of freedom must be positive, found ${options.dof}`);
  if (options.timestep !== undefined && !(options.timestep > 0)) throw new GateInputError(`time step must be positive, found ${options.timestep}`);
  if (samples.length && atoms === 0) throw new GateInputError(`${frameLabel(0, files)} has no atoms`);
  const hasTime = samples.length > 0 && samples[0].time !== null;
  const hasStep = samples.length > 0 && samples[0].step !== null;
  const timeKey = options.timeKey ?? 'time';
  let source: DriftSample['source'] = null;
  for (let k = 0; k < samples.length; k++) {
    const s = samples[k];
    if (s.bad !== null) {
      firstBad = { index: k, what: s.bad };
      break;
    }
    if (s.missing !== null) throw new GateInputError(`${frameLabel(k, files)}: ${s.missing}`);
    if (s.atoms !== atoms)
      throw new GateInputError(`${frameLabel(k, files)}: has ${s.atoms} atoms, frame 0 has ${atoms}; drift needs a fixed number of atoms`);
    if (source === null) source = s.source;
    else if (s.source !== source)
      throw new GateInputError(`${frameLabel(k, files)}: energy from ${s.source}, earlier frames from ${source}; pick one with the energy source option`);
    let time: number;
    if (hasTime) {
      if (s.time === null) throw new GateInputError(`${frameLabel(k, files)}: no '${timeKey}' in the frame info, though frame 0 has one`);
      time = s.time;
    } else if (options.timestep !== undefined) {
      time = hasStep && s.step !== null ? s.step * options.timestep : k * options.timestep;
    } else throw new GateInputError(`${frameLabel(k, files)}: no '${timeKey}' in the frame info; give the time step in fs`);
    if (!Number.isFinite(time)) {
      firstBad = { index: k, what: `a non-finite time (${time})` };
      break;
    }
    const temperature = s.kinetic !== null ? (dof > 0 ? temperatureFromKinetic(s.kinetic, dof) : null) : s.temperature;
    points.push({ timeFs: time, totalEv: s.total as number, temperature });
  }
  const timeSource = hasTime ? `info '${timeKey}'` : hasStep ? `info '${options.stepKey ?? 'step'}' x ${options.timestep} fs` : `frame index x ${options.timestep} fs`;
  const withVel = samples.find((s) => s.velocities !== null);
  return judge(
    {
      frames: samples.length,
      atoms,
      points,
      firstBad,
      energySource: source,
      timeSource: samples.length ? timeSource : null,
      velocitiesSource: withVel ? withVel.velocities!.key : null,
      dof: withVel ? dofFor : null,
      files,
    },
    options,
  );
}

const TIME_NAMES = ['time', 'time_fs', 't', 'simulation_time'];
const STEP_NAMES = ['step', 'steps', 'nstep', 'timestep', 'time_step'];
const ENERGY_NAMES = ['total_energy', 'etot', 'toteng', 'etotal', 'e_tot', 'e_total', 'totalenergy', 'total'];
const TEMPERATURE_NAMES = ['temperature', 'temp', 't_k', 'temp_k'];

/** The drift verdict from thermo tables (rows in file order, tables concatenated). */
export function summarizeThermo(tables: ThermoTable[], options: DriftOptions = {}): GateResult<DriftFigures> {
  driftSettings(options);
  const atoms = options.atoms;
  if (atoms === undefined) throw new GateInputError(`${tables[0]?.path ?? 'thermo table'}: a thermo table does not say how many atoms it describes; give the atom count (1 if the energy column is already per atom)`);
  if (!(Number.isInteger(atoms) && atoms > 0)) throw new GateInputError(`atom count must be a positive integer, found ${atoms}`);
  if (options.timestep !== undefined && !(options.timestep > 0)) throw new GateInputError(`time step must be positive, found ${options.timestep}`);
  const scale = options.timeUnit === 'ps' ? 1000 : 1;
  const points: DriftPoint[] = [];
  const files: FileSpan[] = [];
  let firstBad: SeriesInput['firstBad'] = null;
  let energySource: string | null = null;
  let timeSource: string | null = null;
  let frames = 0;
  for (const table of tables) {
    const { header } = table;
    const need = (name: string | undefined, candidates: string[], what: string, required: boolean): number => {
      const k = findColumn(header, name, candidates);
      if (k < 0 && (required || name !== undefined))
        throw new GateInputError(
          `${table.path}:${table.headerLine}: expected a ${what} column ${name !== undefined ? `named '${name}'` : `(one of ${candidates.join(', ')})`}, found columns ${header.join(', ')}`,
        );
      return k;
    };
    const ec = need(options.energyColumn, ENERGY_NAMES, 'total energy', true);
    const tc = options.stepColumn !== undefined ? -1 : need(options.timeColumn, TIME_NAMES, 'time', false);
    const sc = tc >= 0 ? -1 : need(options.stepColumn, STEP_NAMES, 'step', false);
    const Tc = need(options.temperatureColumn, TEMPERATURE_NAMES, 'temperature', false);
    if (tc < 0 && options.timestep === undefined)
      throw new GateInputError(
        `${table.path}:${table.headerLine}: no time column (one of ${TIME_NAMES.join(', ')}); give the time step in fs${sc >= 0 ? ` (time = ${header[sc]} x time step)` : ' (time = row index x time step)'}`,
      );
    const ts = options.timestep ?? 1;
    const src = `column '${header[ec]}'`;
    if (energySource === null) energySource = src;
    timeSource ??= tc >= 0 ? `column '${header[tc]}'${scale === 1000 ? ' (ps)' : ''}` : sc >= 0 ? `column '${header[sc]}' x ${ts} fs` : `row index x ${ts} fs`;
    const rows = table.lines.length;
    files.push({ path: table.path, first_frame: frames, frames: rows });
    for (let r = 0; r < rows && !firstBad; r++) {
      const idx = frames + r;
      const time = tc >= 0 ? table.values[tc][r] * scale : sc >= 0 ? table.values[sc][r] * ts : idx * ts;
      const e = table.values[ec][r];
      const temp = Tc >= 0 ? table.values[Tc][r] : null;
      if (!Number.isFinite(e) || !Number.isFinite(time)) {
        firstBad = { index: idx, what: `a non-finite ${Number.isFinite(e) ? 'time' : 'total energy'} (${table.path} line ${table.lines[r]})` };
        break;
      }
      points.push({ timeFs: time, totalEv: e, temperature: temp });
    }
    frames += rows;
  }
  return judge(
    { frames, atoms, points, firstBad, energySource, timeSource, velocitiesSource: null, dof: null, files },
    options,
  );
}

const TABLE_EXT = /\.(csv|tsv|dat|txt|log|thermo|out)(\.gz)?$/i;
const XYZ_EXT = /\.(xyz|extxyz)(\.gz)?$/i;

/** Is this path a thermo table (by extension, else by a first line that is not a lone atom count)? */
export async function looksLikeTable(path: string): Promise<boolean> {
  if (TABLE_EXT.test(path)) return true;
  if (XYZ_EXT.test(path) || path.endsWith('.gz')) return false;
  let fh;
  try {
    fh = await open(path, 'r');
  } catch {
    return false; // let the reader report it
  }
  try {
    const buf = Buffer.alloc(256);
    const { bytesRead } = await fh.read(buf, 0, 256, 0);
    const first = buf.subarray(0, bytesRead).toString('utf8').split('\n').find((l) => l.trim() !== '') ?? '';
    return !/^\s*\d+\s*$/.test(first);
  } finally {
    await fh.close();
  }
}

/** The drift gate over extended XYZ files or thermo tables (concatenated in order as one run). */
export async function checkDrift(paths: string[], options: DriftOptions = {}): Promise<GateResult<DriftFigures>> {
  driftSettings(options); // bad limits before reading any file
  let table: boolean;
  if (options.format === 'table') table = true;
  else if (options.format === 'xyz') table = false;
  else {
    const kinds = await Promise.all(paths.map(looksLikeTable));
    if (kinds.some((k) => k !== kinds[0]))
      throw new GateInputError(`cannot mix thermo tables and extended XYZ files in one drift check (${paths.join(', ')})`);
    table = kinds[0] ?? false;
  }
  if (table) {
    const tables: ThermoTable[] = [];
    for (const p of paths) tables.push(await readThermoTable(p));
    return summarizeThermo(tables, options);
  }
  const o = options;
  const frameOptions: DriftFrameOptions = {
    totalKey: o.totalKey,
    energyKey: o.energyKey,
    velocitiesKey: o.velocitiesKey,
    massesKey: o.massesKey,
    forcesKey: o.forcesKey,
    timeKey: o.timeKey,
    stepKey: o.stepKey,
    temperatureKey: o.temperatureKey,
    source: o.source,
  };
  const { results, files } = await mapFiles<DriftSample>(
    paths,
    {
      module: import.meta.url,
      fn: 'driftFrame',
      options: frameOptions,
      columns: [o.velocitiesKey ?? 'velocities', 'momenta', o.massesKey ?? 'masses', o.forcesKey ?? 'forces'],
    },
    o.workers ?? defaultWorkers(),
  );
  return summarizeDrift(results, options, files);
}
