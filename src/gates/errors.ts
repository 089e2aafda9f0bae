/**
 * errors: how far a model's predictions are from the reference labels on the same frames.
 *
 * Reference and predicted frames are paired in file order; each pair must hold the same species and the same
 * positions (within a tolerance, by minimum image in periodic cells, so a prediction written with wrapped
 * positions still matches). Figures: energy MAE and RMSE in meV/atom (per frame |E_pred - E_ref| / N),
 * force-component MAE and RMSE in meV/Å overall and per element, the largest component error with its frame,
 * atom and component, and, when both files carry `stress` (src/atoms/stress.ts), the stress MAE and RMSE in GPa
 * over the six Voigt components and the pressure error in GPa.
 *
 * Limits (limits.ts) apply to the overall figures and, for forces, to each element's figure as well. The gate says
 * how many frames, atoms and force components it judged, and warns when they are too few to trust.
 */
import { MinimumImager } from '../atoms/cell.js';
import type { Frame } from '../atoms/frame.js';
import { readFrames } from '../atoms/xyz/reader.js';
import { firstNonFinite, infoNumber } from './frames.js';
import { GateInputError, type GateResult } from './types.js';
import { Judgement, fmt } from './verdict.js';
import { ERRORS_DEFAULTS } from './defaults.js';
import { ERRORS_LIMIT_NAMES, LIMITS, resolveLimits, type ErrorsLimitName, type ErrorsLimits, type Limit, type LimitInput } from './limits.js';
import { pressureFromStress, stressVoigt } from '../atoms/stress.js';
import { GPA_EV_PER_A3 } from '../atoms/units.js';

export { ERRORS_DEFAULTS };

export interface ErrorsFrameOptions {
  /** Info key of the energy (eV) in the reference / predicted files (default energy). */
  refEnergyKey?: string;
  predEnergyKey?: string;
  /** Per-atom array of forces (eV/Å) in the reference / predicted files (default forces). */
  refForcesKey?: string;
  predForcesKey?: string;
  /** Info key of the stress (eV/Å^3, 6 Voigt or 9 numbers) in the reference / predicted files (default stress). */
  refStressKey?: string;
  predStressKey?: string;
  /** Largest allowed difference of a position between the two files, Å (default 1e-4). */
  positionTolerance?: number;
}

export interface ErrorsOptions extends ErrorsFrameOptions {
  /** Warn/fail limits by their table names (limits.ts); a number is the fail limit; absent names take the defaults. */
  limits?: Partial<Record<ErrorsLimitName, LimitInput>>;
  /** Names the limit keys in messages about bad limits (default "force_rmse.warn"). */
  limitName?: (name: ErrorsLimitName, which: 'warn' | 'fail') => string;
}

export interface ElementAccumulator {
  count: number;
  sumAbs: number;
  sumSq: number;
}

/** What one pair of frames contributes. */
export interface ErrorsSample {
  atoms: number;
  /** (E_pred - E_ref) / N in eV/atom, or null when neither file has an energy for this frame. */
  energyPerAtom: number | null;
  /** Per element sums of force-component errors (eV/Å), empty when neither file has forces. */
  forces: Record<string, ElementAccumulator>;
  /** Largest |component error| in eV/Å, or null without forces. */
  max: { value: number; atom: number; component: 'x' | 'y' | 'z'; species: string } | null;
  /** Stress error (prediction - reference), Voigt xx yy zz yz xz xy in eV/Å^3, or null when a file has no stress. */
  stress: number[] | null;
  /** Which file alone has a stress for this frame (it is then not compared), or null. */
  stressOnly: 'reference' | 'prediction' | null;
  /** "non-finite predicted forces (atom 3)" or null; such a frame adds nothing to the sums. */
  bad: string | null;
}

const AXES = ['x', 'y', 'z'] as const;

function forcesOf(frame: Frame, key: string, which: string, index: number): Float64Array | undefined {
  const col = frame.arrays.get(key);
  if (!col) return undefined;
  if ((col.type !== 'R' && col.type !== 'I') || col.width !== 3)
    throw new GateInputError(`frame ${index}: ${which} per-atom '${key}' should be 3 real numbers per atom, found ${col.type}:${col.width}`);
  return col.values as Float64Array;
}

/**
 * Compare one reference frame with its prediction (pure). Throws GateInputError when the two frames do not
 * describe the same atoms, or when one has an energy or forces the other lacks; messages start with "frame k:".
 */
export function errorsFrame(ref: Frame, pred: Frame, index: number, options: ErrorsFrameOptions = {}): ErrorsSample {
  const refE = options.refEnergyKey ?? 'energy';
  const predE = options.predEnergyKey ?? 'energy';
  const refF = options.refForcesKey ?? 'forces';
  const predF = options.predForcesKey ?? 'forces';
  const tol = options.positionTolerance ?? ERRORS_DEFAULTS.positionTolerance;
  const n = ref.species.length;
  const where = `frame ${index}`;
  if (pred.species.length !== n)
    throw new GateInputError(`${where}: the reference has ${n} atoms, the prediction ${pred.species.length}`);
  for (let a = 0; a < n; a++)
    if (ref.species[a] !== pred.species[a])
      throw new GateInputError(`${where}: atom ${a} is ${ref.species[a]} in the reference but ${pred.species[a]} in the prediction`);
  comparePositions(ref, pred, tol, where);

  const out: ErrorsSample = { atoms: n, energyPerAtom: null, forces: {}, max: null, stress: null, stressOnly: null, bad: null };
  let sr: Float64Array | undefined;
  let sp: Float64Array | undefined;
  try {
    sr = stressVoigt(ref, options.refStressKey ?? 'stress');
  } catch (err) {
    throw new GateInputError(`${where}: reference ${(err as Error).message}`);
  }
  try {
    sp = stressVoigt(pred, options.predStressKey ?? 'stress');
  } catch (err) {
    throw new GateInputError(`${where}: prediction ${(err as Error).message}`);
  }
  const er = infoNumber(ref.info, refE);
  const ep = infoNumber(pred.info, predE);
  if ((er === undefined) !== (ep === undefined))
    throw new GateInputError(
      er === undefined
        ? `${where}: the prediction has energy '${predE}' but the reference has no '${refE}'`
        : `${where}: the reference has energy '${refE}' but the prediction has no '${predE}'`,
    );
  const fr = forcesOf(ref, refF, 'reference', index);
  const fp = forcesOf(pred, predF, 'predicted', index);
  if ((fr === undefined) !== (fp === undefined))
    throw new GateInputError(
      fr === undefined
        ? `${where}: the prediction has per-atom '${predF}' but the reference has no '${refF}'`
        : `${where}: the reference has per-atom '${refF}' but the prediction has no '${predF}'`,
    );
  // Non-finite values: the frame is reported, not counted.
  const checks: [string, number | undefined][] = [
    ['reference energy', er],
    ['predicted energy', ep],
  ];
  for (const [what, v] of checks)
    if (v !== undefined && !Number.isFinite(v)) {
      out.bad = `non-finite ${what} (${v})`;
      return out;
    }
  for (const [what, arr] of [
    ['reference forces', fr],
    ['predicted forces', fp],
    ['reference stress', sr],
    ['predicted stress', sp],
  ] as const) {
    const k = arr ? firstNonFinite(arr) : -1;
    if (k >= 0) {
      out.bad = what.endsWith('stress') ? `non-finite ${what} (component ${k})` : `non-finite ${what} (atom ${Math.floor(k / 3)})`;
      return out;
    }
  }
  if (er !== undefined && ep !== undefined && n > 0) out.energyPerAtom = (ep - er) / n;
  if (sr && sp) out.stress = Array.from(sp, (x, c) => x - sr[c]);
  else if (sr || sp) out.stressOnly = sr ? 'reference' : 'prediction';
  if (fr && fp) {
    let best = -1;
    for (let a = 0; a < n; a++) {
      const sp = ref.species[a];
      const acc = (out.forces[sp] ??= { count: 0, sumAbs: 0, sumSq: 0 });
      for (let c = 0; c < 3; c++) {
        const d = fp[3 * a + c] - fr[3 * a + c];
        const ad = Math.abs(d);
        acc.count++;
        acc.sumAbs += ad;
        acc.sumSq += d * d;
        if (ad > best) {
          best = ad;
          out.max = { value: ad, atom: a, component: AXES[c], species: sp };
        }
      }
    }
  }
  return out;
}

function comparePositions(ref: Frame, pred: Frame, tol: number, where: string): void {
  const n = ref.species.length;
  if (ref.pbc.some((p, k) => p !== pred.pbc[k]))
    throw new GateInputError(`${where}: pbc is ${pbcText(ref)} in the reference but ${pbcText(pred)} in the prediction`);
  if (ref.cell !== null && pred.cell !== null) {
    for (let k = 0; k < 9; k++)
      if (!(Math.abs(ref.cell[k] - pred.cell[k]) <= tol))
        throw new GateInputError(
          `${where}: the cell differs (component ${k}: ${fmt(ref.cell[k], 8)} Å in the reference, ${fmt(pred.cell[k], 8)} Å in the prediction, tolerance ${fmt(tol)} Å): not the same structure`,
        );
  } else if (ref.pbc.some(Boolean) && (ref.cell === null) !== (pred.cell === null))
    throw new GateInputError(`${where}: ${ref.cell === null ? 'the prediction' : 'the reference'} has a cell and the other file has none`);
  const p = ref.positions;
  const q = pred.positions;
  let imager: MinimumImager | null = null;
  if (ref.cell !== null && ref.pbc.some(Boolean)) {
    try {
      imager = new MinimumImager(ref.cell, ref.pbc);
    } catch {
      imager = null; // a cell that cannot be used: compare plainly
    }
  }
  for (let a = 0; a < n; a++) {
    const dx = q[3 * a] - p[3 * a];
    const dy = q[3 * a + 1] - p[3 * a + 1];
    const dz = q[3 * a + 2] - p[3 * a + 2];
    let d = Math.sqrt(dx * dx + dy * dy + dz * dz);
    if (!(d <= tol) && imager && Number.isFinite(d)) d = imager.distance(dx, dy, dz);
    if (!(d <= tol))
      throw new GateInputError(
        `${where}: atom ${a} (${ref.species[a]}) is at ${fmtVec(p, a)} in the reference but ${fmtVec(q, a)} in the prediction (${fmt(d)} Å apart, tolerance ${fmt(tol)} Å): not the same structure`,
      );
  }
}

function pbcText(f: Frame): string {
  return `"${f.pbc.map((p) => (p ? 'T' : 'F')).join(' ')}"`;
}

function fmtVec(v: ArrayLike<number>, a: number): string {
  return `(${[0, 1, 2].map((c) => fmt(v[3 * a + c], 6)).join(', ')})`;
}

export interface ErrorsFigures {
  frames: number;
  /** Frames whose figures count (all but those with non-finite values). */
  judged_frames: number;
  /** Atoms in the judged frames. */
  atoms: number;
  /** Frames that had energies in both files (and finite values). */
  energy_frames: number;
  energy_mae_meV_per_atom: number | null;
  energy_rmse_meV_per_atom: number | null;
  /** Mean signed error (prediction - reference), meV/atom. */
  energy_mean_error_meV_per_atom: number | null;
  max_energy_error: { value_meV_per_atom: number; frame: number } | null;
  force_components: number;
  force_mae_meV_per_A: number | null;
  force_rmse_meV_per_A: number | null;
  per_element: Record<string, { force_mae_meV_per_A: number; force_rmse_meV_per_A: number; components: number; atoms: number }>;
  max_force_error: { value_meV_per_A: number; frame: number; atom: number; component: 'x' | 'y' | 'z'; species: string } | null;
  /** Frames with a stress in both files; the stress figures are over their 6 Voigt components (GPa). */
  stress_frames: number;
  stress_mae_GPa: number | null;
  stress_rmse_GPa: number | null;
  /** Pressure -trace(stress)/3: MAE, RMSE and mean signed error (prediction - reference), GPa. */
  pressure_mae_GPa: number | null;
  pressure_rmse_GPa: number | null;
  pressure_mean_error_GPa: number | null;
  first_bad_frame: number | null;
  bad_frames: number;
  files: { reference: string; predicted: string };
  /** The limits in force (limits.ts names; null = not checked). */
  limits: ErrorsLimits;
  /** Fewer judged frames or force components than these warns. */
  sample_limits: { min_frames: number; min_force_components: number };
}

/** Combine per-frame comparisons into the errors verdict. */
export function summarizeErrors(
  samples: ErrorsSample[],
  options: ErrorsOptions = {},
  files: { reference: string; predicted: string } = { reference: 'reference', predicted: 'predicted' },
): GateResult<ErrorsFigures> {
  const limits = resolveLimits(ERRORS_LIMIT_NAMES, options.limits, options.limitName);
  const sampleLimits = { min_frames: ERRORS_DEFAULTS.minFrames, min_force_components: ERRORS_DEFAULTS.minForceComponents };
  let eN = 0;
  let eAbs = 0;
  let eSq = 0;
  let eSum = 0;
  let eMax: ErrorsFigures['max_energy_error'] = null;
  const elements = new Map<string, ElementAccumulator>();
  let fMax: ErrorsFigures['max_force_error'] = null;
  let firstBad: { index: number; what: string } | null = null;
  let badFrames = 0;
  let atoms = 0;
  let sN = 0;
  let sAbs = 0;
  let sSq = 0;
  let pAbs = 0;
  let pSq = 0;
  let pSum = 0;
  const stressOnly = { reference: 0, prediction: 0 };
  samples.forEach((s, k) => {
    if (s.bad !== null) {
      badFrames++;
      firstBad ??= { index: k, what: s.bad };
      return;
    }
    atoms += s.atoms;
    if (s.energyPerAtom !== null) {
      const d = s.energyPerAtom;
      eN++;
      eAbs += Math.abs(d);
      eSq += d * d;
      eSum += d;
      if (eMax === null || Math.abs(d) * 1e3 > eMax.value_meV_per_atom) eMax = { value_meV_per_atom: Math.abs(d) * 1e3, frame: k };
    }
    for (const [sp, acc] of Object.entries(s.forces)) {
      const t = elements.get(sp) ?? { count: 0, sumAbs: 0, sumSq: 0 };
      t.count += acc.count;
      t.sumAbs += acc.sumAbs;
      t.sumSq += acc.sumSq;
      elements.set(sp, t);
    }
    if (s.max && (fMax === null || s.max.value * 1e3 > fMax.value_meV_per_A))
      fMax = { value_meV_per_A: s.max.value * 1e3, frame: k, atom: s.max.atom, component: s.max.component, species: s.max.species };
    if (s.stress) {
      sN++;
      for (const x of s.stress) {
        const g = x / GPA_EV_PER_A3;
        sAbs += Math.abs(g);
        sSq += g * g;
      }
      const dp = pressureFromStress(s.stress) / GPA_EV_PER_A3;
      pAbs += Math.abs(dp);
      pSq += dp * dp;
      pSum += dp;
    } else if (s.stressOnly) stressOnly[s.stressOnly]++;
  });
  let fN = 0;
  let fAbs = 0;
  let fSq = 0;
  const perElement: ErrorsFigures['per_element'] = {};
  for (const sp of [...elements.keys()].sort()) {
    const t = elements.get(sp)!;
    fN += t.count;
    fAbs += t.sumAbs;
    fSq += t.sumSq;
    perElement[sp] = {
      force_mae_meV_per_A: (t.sumAbs / t.count) * 1e3,
      force_rmse_meV_per_A: Math.sqrt(t.sumSq / t.count) * 1e3,
      components: t.count,
      atoms: t.count / 3,
    };
  }
  const judged = samples.length - badFrames;
  const fig: ErrorsFigures = {
    frames: samples.length,
    judged_frames: judged,
    atoms,
    energy_frames: eN,
    energy_mae_meV_per_atom: eN ? (eAbs / eN) * 1e3 : null,
    energy_rmse_meV_per_atom: eN ? Math.sqrt(eSq / eN) * 1e3 : null,
    energy_mean_error_meV_per_atom: eN ? (eSum / eN) * 1e3 : null,
    max_energy_error: eMax,
    force_components: fN,
    force_mae_meV_per_A: fN ? (fAbs / fN) * 1e3 : null,
    force_rmse_meV_per_A: fN ? Math.sqrt(fSq / fN) * 1e3 : null,
    per_element: perElement,
    max_force_error: fMax,
    stress_frames: sN,
    stress_mae_GPa: sN ? sAbs / (6 * sN) : null,
    stress_rmse_GPa: sN ? Math.sqrt(sSq / (6 * sN)) : null,
    pressure_mae_GPa: sN ? pAbs / sN : null,
    pressure_rmse_GPa: sN ? Math.sqrt(pSq / sN) : null,
    pressure_mean_error_GPa: sN ? pSum / sN : null,
    first_bad_frame: firstBad ? (firstBad as { index: number }).index : null,
    bad_frames: badFrames,
    files,
    limits,
    sample_limits: sampleLimits,
  };
  const j = new Judgement();
  if (samples.length === 0) j.fail('no frames to compare');
  if (firstBad !== null) {
    const fb = firstBad as { index: number; what: string };
    j.fail(`${badFrames} frame(s) hold non-finite values and were left out; the first is frame ${fb.index} with ${fb.what}`);
  }
  if (samples.length > 0 && eN === 0 && fN === 0 && sN === 0 && badFrames < samples.length)
    throw new GateInputError(
      `${files.reference} and ${files.predicted}: no energies ('${options.refEnergyKey ?? 'energy'}' / '${options.predEnergyKey ?? 'energy'}') and no forces ('${options.refForcesKey ?? 'forces'}' / '${options.predForcesKey ?? 'forces'}') to compare`,
    );
  const judge = (name: ErrorsLimitName, value: number | null, label: string = LIMITS[name].what): void => {
    if (value === null) return;
    const lim: Limit = limits[name];
    const unit = LIMITS[name].unit;
    j.limit(value, lim.warn ?? undefined, lim.fail ?? undefined, (kind, l) => `${label} ${fmt(value)} ${unit} is above the ${kind} limit ${fmt(l)} ${unit}`);
  };
  judge('energy_rmse', fig.energy_rmse_meV_per_atom);
  judge('energy_mae', fig.energy_mae_meV_per_atom);
  const els = Object.keys(perElement);
  const overall = els.length > 1 ? ' (all elements)' : '';
  judge('force_rmse', fig.force_rmse_meV_per_A, `force RMSE${overall}`);
  judge('force_mae', fig.force_mae_meV_per_A, `force MAE${overall}`);
  if (els.length > 1)
    for (const el of els) {
      judge('force_rmse', perElement[el].force_rmse_meV_per_A, `${el} force RMSE`);
      judge('force_mae', perElement[el].force_mae_meV_per_A, `${el} force MAE`);
    }
  judge('stress_rmse', fig.stress_rmse_GPa);
  // Honest sample sizes: too little data warns (never hides a fail: the verdict is the worst of all).
  if (judged > 0) {
    const few: string[] = [];
    if (judged < sampleLimits.min_frames) few.push(`fewer than ${sampleLimits.min_frames} frames`);
    if (fN > 0 && fN < sampleLimits.min_force_components) few.push(`fewer than ${sampleLimits.min_force_components} force components`);
    const size = `${judged} frame${judged === 1 ? '' : 's'} (${atoms} atoms${fN > 0 ? `, ${fN} force components` : ''})`;
    if (few.length) j.warn(`judged on ${size}: too few to trust (${few.join(', ')})`);
    else j.note(`judged on ${size}`);
  }
  if (samples.length > 0 && eN === 0 && badFrames < samples.length) j.note('no energies to compare');
  if (samples.length > 0 && fN === 0 && badFrames < samples.length) j.note('no forces to compare');
  if (stressOnly.reference + stressOnly.prediction > 0)
    j.note(
      `stress not compared in ${stressOnly.reference + stressOnly.prediction} frame(s): only the ${stressOnly.reference >= stressOnly.prediction ? 'reference' : 'prediction'} has '${stressOnly.reference >= stressOnly.prediction ? (options.refStressKey ?? 'stress') : (options.predStressKey ?? 'stress')}'`,
    );
  if (limits.stress_rmse.warn !== null || limits.stress_rmse.fail !== null)
    if (sN === 0 && judged > 0) j.warn('a stress limit is set but no frame has a stress in both files: stress not judged');
  if (j.verdict === 'pass' && samples.length > 0) {
    const er = fig.energy_rmse_meV_per_atom;
    const fr = fig.force_rmse_meV_per_A;
    j.note(
      `energy RMSE ${er === null ? 'n/a' : `${fmt(er)} meV/atom`}, force RMSE ${fr === null ? 'n/a' : `${fmt(fr)} meV/Å`}${sN ? `, stress RMSE ${fmt(fig.stress_rmse_GPa!)} GPa` : ''}: within the limits`,
    );
  }
  return { gate: 'errors', verdict: j.verdict, reasons: j.reasons, figures: fig };
}

/** Count the frames left in an iterator (to say how long the longer file is). */
async function countRest(it: AsyncIterator<Frame>): Promise<number> {
  let n = 0;
  while (!(await it.next()).done) n++;
  return n;
}

/** The errors gate: reference file against predicted file, frame by frame in file order. */
export async function checkErrors(refPath: string, predPath: string, options: ErrorsOptions = {}): Promise<GateResult<ErrorsFigures>> {
  const tol = options.positionTolerance ?? ERRORS_DEFAULTS.positionTolerance;
  if (!(tol >= 0)) throw new GateInputError(`position tolerance must be a non-negative number of Å, found ${tol}`);
  resolveLimits(ERRORS_LIMIT_NAMES, options.limits, options.limitName); // bad limits before reading any file
  const ref = readFrames(refPath, { columns: [options.refForcesKey ?? 'forces'] });
  const pred = readFrames(predPath, { columns: [options.predForcesKey ?? 'forces'] });
  const samples: ErrorsSample[] = [];
  try {
    for (let index = 0; ; index++) {
      const [a, b] = await Promise.all([ref.next(), pred.next()]);
      if (a.done || b.done) {
        if (a.done && b.done) break;
        const more = a.done ? predPath : refPath;
        const fewer = a.done ? refPath : predPath;
        const extra = 1 + (await countRest(a.done ? pred : ref));
        throw new GateInputError(
          `${fewer} has ${index} frames but ${more} has ${index + extra}: the reference and predicted files must hold the same frames in the same order`,
        );
      }
      try {
        samples.push(errorsFrame(a.value, b.value, index, options));
      } catch (err) {
        if (err instanceof GateInputError) throw new GateInputError(`${refPath} vs ${predPath}, ${err.message}`);
        throw err;
      }
    }
  } finally {
    await Promise.allSettled([ref.return(undefined), pred.return(undefined)]);
  }
  return summarizeErrors(samples, options, { reference: refPath, predicted: predPath });
}
