/**
 * trajectory: is an MD trajectory the run that was asked for? Frames and time span against the steps, the
 * write interval and the time step; the mean temperature against the thermostat's; the mean pressure against
 * the barostat's. Pure: frames in, figures and verdict out.
 *
 * Length (the rule the docs state, docs/tasks.md):
 * - a run of S steps writing every W steps writes the frames of steps 0, W, 2W ... floor(S/W) W: expected frames
 *   floor(S/W) + 1. A program that does not write step 0 is accepted with floor(S/W) frames (at least 1).
 * - the first frame is the step-0 frame when its `step` info is 0, or (without step) its `time` info is within half
 *   a write interval of 0; with neither, only the frame count is checked.
 * - time reached = last frame's time - first frame's time (+ W x dt when the first frame is not step 0); time from
 *   info `time` (fs), else info `step` x time step. Expected: floor(S/W) x W x dt.
 * - short (fail): fewer frames than the minimum above, or the time reached falls more than half a write interval
 *   short. Unless the raw trajectory holds the first contact violation or non-finite frame (`cutAt`): a run that
 *   stopped at/after the point where ratchet cuts it anyway is not short.
 * - long (warn): more than expected + 1 frames, or time reached beyond S x dt by more than half a write interval.
 *
 * Temperature (when asked): per-frame kinetic temperature from the velocities by equipartition, with the degrees of
 * freedom of the drift gate (its defaultDof), or info `temperature` without velocities. The first 20 % of
 * the frames (before any cut) are discarded as equilibration. Standard error of the mean: sample standard deviation
 * over sqrt(n), times sqrt((1 + r)/(1 - r)) with r the lag-1 autocorrelation clipped to [0, 0.9] (the statistical
 * inefficiency of a first-order autoregressive series: common practice for correlated MD frames). With fewer than
 * 3 frames the canonical fluctuation stands in: the instantaneous kinetic temperature of a canonical ensemble
 * fluctuates by T sqrt(2/dof) (relative sqrt(2/(3N)) for 3N degrees of freedom; D. Frenkel & B. Smit,
 * "Understanding Molecular Simulation", 2nd ed. 2002, sec. 4.1, from memory). Bands: warn when |mean - T| is above
 * max(5 % of T, 3 standard errors), fail above max(20 % of T, 5 standard errors). Because the standard error comes
 * from the run's own scatter, a small cell's large but honest fluctuations widen the band; a run held at the wrong
 * temperature (a thermostat set wrong, velocities drawn cold) has a small scatter about the wrong mean and is named.
 * 5 % and 20 % are this tool's choice: within 5 % the explored state is the one asked for; beyond 20 % the run
 * explored another state (e.g. 320 K for 400 K) and what its committee says does not describe the condition.
 *
 * Pressure (when asked, bar): per frame -trace(stress)/3 from info `stress` (src/atoms/stress.ts: eV/Å^3, the
 * potential part) plus the kinetic part 2K/(3V) from the velocities (= N k_B T / V), else N k_B T / V with the
 * info `temperature` or the asked temperature. Same equilibration and standard error as the temperature. Bands:
 * warn above max(1000 bar, 10 % of |P|, 3 standard errors), fail above max(5000 bar, 25 % of |P|, 6 standard
 * errors). The instantaneous pressure of a cell of a few hundred atoms swings by kbar from frame to frame, and
 * machine-learned potentials' stresses are commonly off by 0.1 GPa (1000 bar) or more (common practice): the
 * floors keep such cells and models from being failed for noise, the standard-error terms for short runs.
 */
import type { Frame } from '../atoms/frame.js';
import { evPerA3ToBar, frameVolume, kineticPressure, pressureFromStress, stressVoigt } from '../atoms/stress.js';
import { KB_EV_PER_K, temperatureFromKinetic } from '../atoms/units.js';
import { defaultDof, driftFrame } from './drift.js';
import { defaultWorkers, frameLabel, mapFiles } from './frames.js';
import { GateInputError, type FileSpan, type GateResult } from './types.js';
import { Judgement, fmt } from './verdict.js';

export const TRAJECTORY_DEFAULTS = {
  /** Fraction of the frames (before any cut) discarded as equilibration before the means. */
  equilibrationFraction: 0.2,
  /** Relative temperature bands and their standard-error multiples. */
  temperatureWarn: 0.05,
  temperatureFail: 0.2,
  temperatureWarnSe: 3,
  temperatureFailSe: 5,
  /** Pressure bands: bar floors, relative to |P|, standard-error multiples. */
  pressureWarnBar: 1000,
  pressureFailBar: 5000,
  pressureWarnRel: 0.1,
  pressureFailRel: 0.25,
  pressureWarnSe: 3,
  pressureFailSe: 6,
  /** Lag-1 autocorrelation is clipped to this for the statistical inefficiency. */
  maxCorrelation: 0.9,
  /** With fewer judged frames than this the canonical fluctuation stands in for the scatter. */
  minScatterFrames: 3,
} as const;

/** Where each frame's numbers are (extended XYZ keys). */
export interface TrajectoryFrameOptions {
  velocitiesKey?: string;
  massesKey?: string;
  timeKey?: string;
  stepKey?: string;
  temperatureKey?: string;
  stressKey?: string;
}

/** What was asked of the run. */
export interface TrajectoryAsk {
  /** MD steps asked. */
  steps: number;
  /** A frame every this many steps. */
  writeEvery: number;
  /** Time step, fs. */
  timestep: number;
  /** Thermostat temperature, K (checked when given). */
  temperature?: number;
  /** Barostat pressure, bar (checked when given). */
  pressure?: number;
  /** First frame ratchet cuts the run at (contact violation or non-finite), or null. */
  cutAt?: number | null;
  /** Who the run is, for the reasons ("condition c300"). */
  what?: string;
}

export interface TrajectoryOptions extends TrajectoryFrameOptions, TrajectoryAsk {
  /** Degrees of freedom for the temperature (default: the drift gate's defaultDof). */
  dof?: number;
  equilibrationFraction?: number;
  workers?: number;
}

/** What one frame contributes (small and clonable). */
export interface TrajectorySample {
  atoms: number;
  periodic: boolean;
  time: number | null;
  step: number | null;
  /** Kinetic energy in eV from the velocities, null without. */
  kinetic: number | null;
  /** Info temperature, K. */
  temperature: number | null;
  /** Potential part of the pressure, eV/Å^3, from the stress; null without a stress. */
  stressPressure: number | null;
  volume: number | null;
  /** Non-finite positions or velocities: the run blew up here. */
  bad: string | null;
  /** Why the frame's numbers cannot be read (bad stress shape, unknown element...). */
  problem: string | null;
}

/** The per-frame part of the trajectory gate (pure; what mapFrames runs on each frame). */
export function trajectoryFrame(frame: Frame, index: number, options: TrajectoryFrameOptions = {}): TrajectorySample {
  const velocitiesKey = options.velocitiesKey ?? 'velocities';
  const d = driftFrame(frame, index, {
    velocitiesKey,
    massesKey: options.massesKey,
    timeKey: options.timeKey,
    stepKey: options.stepKey,
    temperatureKey: options.temperatureKey,
    forcesKey: '\u0000', // forces are the committee gate's business
    source: 'kinetic',
  });
  const s: TrajectorySample = {
    atoms: d.atoms,
    periodic: d.periodic,
    time: d.time,
    step: d.step,
    kinetic: d.kinetic,
    temperature: d.temperature,
    stressPressure: null,
    volume: frameVolume(frame) ?? null,
    bad: d.bad,
    problem: null,
  };
  if (d.bad === null && d.kinetic === null && frame.arrays.has(velocitiesKey)) s.problem = d.missing;
  try {
    const v = stressVoigt(frame, options.stressKey ?? 'stress');
    if (v) s.stressPressure = pressureFromStress(v);
  } catch (err) {
    s.problem = (err as Error).message;
  }
  return s;
}

export interface MeanFigures {
  mean: number;
  std: number | null;
  se: number;
  frames: number;
  lag1: number | null;
}

export interface TrajectoryFigures {
  frames: number;
  expected_frames: number;
  min_frames: number;
  steps: number;
  write_every: number;
  timestep_fs: number;
  /** 0 when the first frame is the step-0 frame, write_every when it is not, null when the frames do not say. */
  first_frame_step: number | null;
  /** Time from step 0 to the last frame, fs (null without time or step info). */
  span_fs: number | null;
  expected_span_fs: number;
  time_source: string | null;
  short: boolean;
  long: boolean;
  cut_at: number | null;
  /** Frames the means are taken over, and the equilibration frames discarded before them. */
  frames_judged: number;
  equilibration_frames: number;
  temperature_target_K: number | null;
  mean_temperature_K: number | null;
  temperature_std_K: number | null;
  temperature_se_K: number | null;
  temperature_source: string | null;
  degrees_of_freedom: number | null;
  pressure_target_bar: number | null;
  mean_pressure_bar: number | null;
  pressure_std_bar: number | null;
  pressure_se_bar: number | null;
  pressure_kinetic_source: string | null;
  files: FileSpan[];
}

/** Mean, sample standard deviation and standard error (with the lag-1 statistical inefficiency). */
export function meanWithError(x: ArrayLike<number>, maxCorrelation: number = TRAJECTORY_DEFAULTS.maxCorrelation): MeanFigures {
  const n = x.length;
  let m = 0;
  for (let k = 0; k < n; k++) m += x[k];
  m /= n;
  if (n < 2) return { mean: m, std: null, se: 0, frames: n, lag1: null };
  let ss = 0;
  let c1 = 0;
  for (let k = 0; k < n; k++) {
    ss += (x[k] - m) ** 2;
    if (k + 1 < n) c1 += (x[k] - m) * (x[k + 1] - m);
  }
  const std = Math.sqrt(ss / (n - 1));
  const lag1 = ss > 0 ? c1 / ss : 0;
  const r = Math.min(Math.max(lag1, 0), maxCorrelation);
  const se = (std / Math.sqrt(n)) * Math.sqrt((1 + r) / (1 - r));
  return { mean: m, std, se, frames: n, lag1 };
}

/** The drift gate's default degrees of freedom (its defaultDof, whichever shape it returns). */
function dofOf(atoms: number, periodic: boolean): number {
  const d = defaultDof(atoms, periodic) as unknown;
  return typeof d === 'number' ? d : (d as { dof: number }).dof;
}

const pct = (x: number): string => `${fmt(x * 100, 3)} %`;

/** Combine per-frame samples (global frame order) into the trajectory verdict. Throws GateInputError for unusable input. */
export function summarizeTrajectory(samples: TrajectorySample[], options: TrajectoryOptions, files: FileSpan[] = []): GateResult<TrajectoryFigures> {
  const S = options.steps;
  const W = options.writeEvery;
  const dt = options.timestep;
  if (!(Number.isInteger(S) && S >= 0)) throw new GateInputError(`steps asked must be a whole number of at least 0, found ${S}`);
  if (!(Number.isInteger(W) && W >= 1)) throw new GateInputError(`write_every must be a whole number of at least 1, found ${W}`);
  if (!(dt > 0)) throw new GateInputError(`time step must be positive (fs), found ${dt}`);
  if (options.temperature !== undefined && !(options.temperature > 0)) throw new GateInputError(`temperature asked must be positive (K), found ${options.temperature}`);
  const frac = options.equilibrationFraction ?? TRAJECTORY_DEFAULTS.equilibrationFraction;
  if (!(frac >= 0 && frac < 1)) throw new GateInputError(`equilibration fraction must be in [0, 1), found ${frac}`);
  const who = options.what ? `${options.what}: ` : '';
  const timeKey = options.timeKey ?? 'time';
  const stepKey = options.stepKey ?? 'step';
  const n = samples.length;
  for (let k = 0; k < n; k++) if (samples[k].problem !== null) throw new GateInputError(`${frameLabel(k, files)}: ${samples[k].problem}`);

  // ---- length ----
  const written = Math.floor(S / W);
  const expected = written + 1;
  const expectedSpan = written * W * dt;
  const hasStep = n > 0 && samples[0].step !== null;
  const hasTime = n > 0 && samples[0].time !== null;
  const times: number[] = [];
  for (let k = 0; k < n && (hasTime || hasStep); k++) {
    const s = samples[k];
    if (hasTime && s.time === null) throw new GateInputError(`${frameLabel(k, files)}: no '${timeKey}' in the frame info, though frame 0 has one`);
    if (!hasTime && s.step === null) throw new GateInputError(`${frameLabel(k, files)}: no '${stepKey}' in the frame info, though frame 0 has one`);
    times.push(hasTime ? (s.time as number) : (s.step as number) * dt);
  }
  let firstStep: number | null = null;
  if (hasStep) firstStep = samples[0].step === 0 ? 0 : W;
  else if (hasTime) firstStep = Math.abs(samples[0].time as number) <= 0.5 * W * dt ? 0 : W;
  const span = times.length ? times[times.length - 1] - times[0] + (firstStep === 0 ? 0 : W * dt) : null;
  const minFrames = firstStep === 0 ? expected : Math.max(1, written);
  const tol = 0.5 * W * dt;
  const short = n < minFrames || (span !== null && span < expectedSpan - tol);
  const long = n > expected + 1 || (span !== null && span > S * dt + tol);
  const cutAt = options.cutAt ?? null;
  const cutInside = cutAt !== null && cutAt < n;
  const timeSource = hasTime ? `info '${timeKey}'` : hasStep ? `info '${stepKey}' x ${dt} fs` : null;

  const j = new Judgement();
  /** Plain remarks, kept only when nothing warns or fails (then the reasons say only what is wrong). */
  const notes: string[] = [];
  const reached = `${n} of ${expected} expected frames (${span === null ? 'the frames carry no time or step: frame count only' : `${fmt(span)} of ${fmt(expectedSpan)} fs`})`;
  if (n === 0) j.fail(`${who}the trajectory has no frames (${S} steps asked, a frame every ${W})`);
  else if (short && cutInside)
    notes.push(`${who}the run ended after ${reached}, at or after its first contact violation or non-finite frame (frame ${cutAt}): cut there by ratchet, not counted as short`);
  else if (short)
    j.fail(`${who}trajectory ends after ${reached}: the run stopped before the ${S} steps asked (a frame every ${W} steps of ${fmt(dt)} fs)`);
  else if (long)
    j.warn(`${who}trajectory is longer than asked: ${n} frames${span === null ? '' : ` over ${fmt(span)} fs`}, expected ${expected} frames over ${fmt(expectedSpan)} fs (${S} steps, a frame every ${W} steps of ${fmt(dt)} fs)`);
  else notes.push(`${who}${n} frames over ${span === null ? 'an unknown time (no time or step info)' : `${fmt(span)} fs`}, as asked`);

  // ---- frames the means are taken over ----
  let usable = cutInside ? (cutAt as number) : n;
  const firstBad = samples.findIndex((s) => s.bad !== null);
  if (firstBad >= 0 && firstBad < usable) usable = firstBad;
  const skip = Math.floor(usable * frac);
  const judged = samples.slice(skip, usable);
  const atoms = n ? samples[0].atoms : 0;
  const dof = options.dof ?? (atoms > 0 ? dofOf(atoms, samples[0].periodic) : null);
  if (options.dof !== undefined && !(options.dof > 0)) throw new GateInputError(`degrees of freedom must be positive, found ${options.dof}`);
  const range = judged.length ? `frames ${skip}-${usable - 1}` : 'no frames';

  /** Per-frame values from one source, chosen by the first judged frame; a later frame lacking it is an input error. */
  const series = (pick: (s: TrajectorySample) => number | null, lacking: string): number[] => {
    const out: number[] = [];
    judged.forEach((s, i) => {
      const v = pick(s);
      if (v === null) throw new GateInputError(`${frameLabel(skip + i, files)}: ${lacking}, though frame ${skip} has it`);
      out.push(v);
    });
    return out;
  };

  // ---- temperature ----
  const Tt = options.temperature;
  let tFig: MeanFigures | null = null;
  let tSource: string | null = null;
  const velocitiesKey = options.velocitiesKey ?? 'velocities';
  const temperatureKey = options.temperatureKey ?? 'temperature';
  let tSeries: number[] | null = null;
  if (judged.length && judged[0].kinetic !== null && dof !== null && dof > 0) {
    tSeries = series((s) => (s.kinetic === null ? null : temperatureFromKinetic(s.kinetic, dof)), `no per-atom '${velocitiesKey}'`);
    tSource = `velocities (${dof} degrees of freedom)`;
  } else if (judged.length && judged[0].temperature !== null) {
    tSeries = series((s) => s.temperature, `no '${temperatureKey}' in the frame info`);
    tSource = `info '${temperatureKey}'`;
  }
  if (tSeries) {
    tFig = meanWithError(tSeries);
    if (tFig.frames < TRAJECTORY_DEFAULTS.minScatterFrames && judged[0].kinetic !== null && dof)
      tFig.se = (tFig.mean * Math.sqrt(2 / dof)) / Math.sqrt(tFig.frames);
  }
  if (Tt !== undefined) {
    if (!judged.length) {
      if (n > 0) j.warn(`${who}no frame to take the mean temperature over (${usable} usable frame(s))`);
    } else if (!tFig) j.warn(`${who}the temperature could not be checked: the frames carry neither per-atom '${velocitiesKey}' nor info '${temperatureKey}'`);
    else {
      const dev = tFig.mean - Tt;
      const warnAt = Math.max(TRAJECTORY_DEFAULTS.temperatureWarn * Tt, TRAJECTORY_DEFAULTS.temperatureWarnSe * tFig.se);
      const failAt = Math.max(TRAJECTORY_DEFAULTS.temperatureFail * Tt, TRAJECTORY_DEFAULTS.temperatureFailSe * tFig.se);
      const said =
        `${who}mean temperature ${fmt(tFig.mean)} K over ${range} (from ${tSource}) is ${pct(Math.abs(dev) / Tt)} ${dev < 0 ? 'below' : 'above'} the ${fmt(Tt)} K asked` +
        ` (standard error ${fmt(tFig.se)} K`;
      if (Math.abs(dev) > failAt) j.fail(`${said}; fails beyond ${fmt(failAt)} K = max(${pct(TRAJECTORY_DEFAULTS.temperatureFail)}, ${TRAJECTORY_DEFAULTS.temperatureFailSe} standard errors))`);
      else if (Math.abs(dev) > warnAt) j.warn(`${said}; warns beyond ${fmt(warnAt)} K = max(${pct(TRAJECTORY_DEFAULTS.temperatureWarn)}, ${TRAJECTORY_DEFAULTS.temperatureWarnSe} standard errors))`);
      else notes.push(`${who}mean temperature ${fmt(tFig.mean)} K (${fmt(Tt)} K asked)`);
    }
  }

  // ---- pressure ----
  const Pt = options.pressure;
  let pFig: MeanFigures | null = null;
  let kinSource: string | null = null;
  if (Pt !== undefined && n > 0) {
    const stressKey = options.stressKey ?? 'stress';
    if (!judged.length) j.warn(`${who}no frame to take the mean pressure over (${usable} usable frame(s))`);
    else if (judged[0].stressPressure === null) j.warn(`${who}the pressure could not be checked: the frames carry no '${stressKey}' (eV/Å^3) in their info`);
    else if (judged[0].volume === null) j.warn(`${who}the pressure could not be checked: the frames have no cell (no volume)`);
    else {
      kinSource =
        judged[0].kinetic !== null
          ? `velocities (2K/3V)`
          : judged[0].temperature !== null
            ? `info '${temperatureKey}' (N k_B T/V)`
            : Tt !== undefined
              ? `the ${fmt(Tt)} K asked (N k_B T/V)`
              : 'not included (no velocities or temperature)';
      const ps = series((s) => {
        if (s.stressPressure === null || s.volume === null) return null;
        let kin = 0;
        if (judged[0].kinetic !== null) {
          if (s.kinetic === null) return null;
          kin = kineticPressure(s.atoms, (2 * s.kinetic) / (3 * s.atoms * KB_EV_PER_K), s.volume);
        } else if (judged[0].temperature !== null) {
          if (s.temperature === null) return null;
          kin = kineticPressure(s.atoms, s.temperature, s.volume);
        } else if (Tt !== undefined) kin = kineticPressure(s.atoms, Tt, s.volume);
        return evPerA3ToBar(s.stressPressure + kin);
      }, `no '${stressKey}', cell or kinetic part like the earlier frames`);
      pFig = meanWithError(ps);
      const dev = pFig.mean - Pt;
      const D = TRAJECTORY_DEFAULTS;
      const warnAt = Math.max(D.pressureWarnBar, D.pressureWarnRel * Math.abs(Pt), D.pressureWarnSe * pFig.se);
      const failAt = Math.max(D.pressureFailBar, D.pressureFailRel * Math.abs(Pt), D.pressureFailSe * pFig.se);
      const said = `${who}mean pressure ${fmt(pFig.mean)} bar over ${range} is ${fmt(Math.abs(dev))} bar ${dev < 0 ? 'below' : 'above'} the ${fmt(Pt)} bar asked (standard error ${fmt(pFig.se)} bar`;
      if (Math.abs(dev) > failAt) j.fail(`${said}; fails beyond ${fmt(failAt)} bar = max(${D.pressureFailBar} bar, ${pct(D.pressureFailRel)} of |P|, ${D.pressureFailSe} standard errors))`);
      else if (Math.abs(dev) > warnAt) j.warn(`${said}; warns beyond ${fmt(warnAt)} bar = max(${D.pressureWarnBar} bar, ${pct(D.pressureWarnRel)} of |P|, ${D.pressureWarnSe} standard errors))`);
      else notes.push(`${who}mean pressure ${fmt(pFig.mean)} bar (${fmt(Pt)} bar asked)`);
    }
  }

  const figures: TrajectoryFigures = {
    frames: n,
    expected_frames: expected,
    min_frames: minFrames,
    steps: S,
    write_every: W,
    timestep_fs: dt,
    first_frame_step: firstStep,
    span_fs: span,
    expected_span_fs: expectedSpan,
    time_source: timeSource,
    short,
    long,
    cut_at: cutAt,
    frames_judged: judged.length,
    equilibration_frames: skip,
    temperature_target_K: Tt ?? null,
    mean_temperature_K: tFig ? tFig.mean : null,
    temperature_std_K: tFig ? tFig.std : null,
    temperature_se_K: tFig ? tFig.se : null,
    temperature_source: tSource,
    degrees_of_freedom: tSource !== null && judged[0]?.kinetic !== null ? dof : null,
    pressure_target_bar: Pt ?? null,
    mean_pressure_bar: pFig ? pFig.mean : null,
    pressure_std_bar: pFig ? pFig.std : null,
    pressure_se_bar: pFig ? pFig.se : null,
    pressure_kinetic_source: kinSource,
    files,
  };
  return { gate: 'trajectory', verdict: j.verdict, reasons: j.verdict === 'pass' ? notes : j.reasons, figures };
}

/** The trajectory gate over extended XYZ files (concatenated in order as one run). */
export async function checkTrajectory(paths: string[], options: TrajectoryOptions): Promise<GateResult<TrajectoryFigures>> {
  const frameOptions: TrajectoryFrameOptions = {
    velocitiesKey: options.velocitiesKey,
    massesKey: options.massesKey,
    timeKey: options.timeKey,
    stepKey: options.stepKey,
    temperatureKey: options.temperatureKey,
    stressKey: options.stressKey,
  };
  const { results, files } = await mapFiles<TrajectorySample>(
    paths,
    {
      module: import.meta.url,
      fn: 'trajectoryFrame',
      options: frameOptions,
      columns: [options.velocitiesKey ?? 'velocities', options.massesKey ?? 'masses'],
    },
    options.workers ?? defaultWorkers(),
  );
  return summarizeTrajectory(results, options, files);
}
