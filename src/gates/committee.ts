/**
 * committee: how much the committee's models disagree on each frame's forces.
 *
 * Per atom the spread is sqrt( (1/M) sum_m |F_i^m - mean_m F_i|^2 ) over the M per-atom arrays forces_0 ... forces_{M-1}
 * (population form, 1/M, as in the glossary of design.md); a frame's spread is the max over its atoms, and its mean over
 * atoms is reported beside it. Each frame falls in a band of the window [lower, upper): confident (< lower),
 * informative (lower <= spread < upper: worth labelling), runaway (>= upper, or non-finite: the run left the known region).
 */
import { readFrames } from '../atoms/xyz/reader.js';
import type { Frame } from '../atoms/frame.js';
import { defaultWorkers, firstNonFinite, frameLabel, mapFiles } from './frames.js';
import { GateInputError, type FileSpan, type GateResult } from './types.js';
import { Judgement, fmt } from './verdict.js';
import { COMMITTEE_DEFAULTS } from './defaults.js';

export { COMMITTEE_DEFAULTS };

export type Band = 'confident' | 'informative' | 'runaway';

export interface CommitteeFrameOptions {
  /** Per-atom arrays are `${prefix}0` ... (default forces_). */
  prefix?: string;
  /** Number of models; default: as many consecutive `${prefix}k` arrays as the frame has. */
  models?: number;
}

export interface CommitteeOptions extends CommitteeFrameOptions {
  lower?: number;
  upper?: number;
  maxRunawayFraction?: number;
  workers?: number;
}

/** One frame's spread (small and clonable: what mapFrames returns from a worker). */
export interface CommitteeSample {
  atoms: number;
  models: number;
  /** Max over atoms of the per-atom spread, eV/Å (NaN when a force is non-finite). */
  max: number;
  /** Mean over atoms, eV/Å. */
  mean: number;
  /** Atom with the largest spread (-1 for no atoms). */
  atom: number;
  /** "non-finite forces_2 (atom 7)" or null. */
  bad: string | null;
  /** Why the frame cannot be judged (missing array...), or null. */
  missing: string | null;
}

/** Per-atom spread of M force arrays (each 3N, eV/Å) into out (N). */
export function atomSpreads(forces: ArrayLike<number>[], atoms: number, out = new Float64Array(atoms)): Float64Array {
  const m = forces.length;
  for (let a = 0; a < atoms; a++) {
    let sx = 0;
    let sy = 0;
    let sz = 0;
    for (let k = 0; k < m; k++) {
      const f = forces[k];
      sx += f[3 * a];
      sy += f[3 * a + 1];
      sz += f[3 * a + 2];
    }
    sx /= m;
    sy /= m;
    sz /= m;
    let ss = 0;
    for (let k = 0; k < m; k++) {
      const f = forces[k];
      const dx = f[3 * a] - sx;
      const dy = f[3 * a + 1] - sy;
      const dz = f[3 * a + 2] - sz;
      ss += dx * dx + dy * dy + dz * dz;
    }
    out[a] = Math.sqrt(ss / m);
  }
  return out;
}

/** Number of consecutive `${prefix}k` arrays in the frame, from k = 0. */
export function countModels(frame: Frame, prefix: string = COMMITTEE_DEFAULTS.prefix): number {
  let m = 0;
  while (frame.arrays.has(`${prefix}${m}`)) m++;
  return m;
}

/** The per-frame part of the committee gate (pure; what mapFrames runs on each frame). */
export function committeeFrame(frame: Frame, _index: number, options: CommitteeFrameOptions = {}): CommitteeSample {
  const prefix = options.prefix ?? COMMITTEE_DEFAULTS.prefix;
  const n = frame.species.length;
  const m = options.models ?? countModels(frame, prefix);
  const out: CommitteeSample = { atoms: n, models: m, max: NaN, mean: NaN, atom: -1, bad: null, missing: null };
  const forces: Float64Array[] = [];
  for (let k = 0; k < m; k++) {
    const col = frame.arrays.get(`${prefix}${k}`);
    if (!col) {
      out.missing = `no per-atom '${prefix}${k}' (expected ${m} models)`;
      return out;
    }
    if ((col.type !== 'R' && col.type !== 'I') || col.width !== 3) {
      out.missing = `per-atom '${prefix}${k}' should be 3 real numbers per atom, found ${col.type}:${col.width}`;
      return out;
    }
    const bad = firstNonFinite(col.values as Float64Array);
    if (bad >= 0 && out.bad === null) out.bad = `non-finite ${prefix}${k} (atom ${Math.floor(bad / 3)})`;
    forces.push(col.values as Float64Array);
  }
  if (m < 2) {
    out.missing = `found ${m} committee force array(s) '${prefix}0'...; a spread needs at least 2`;
    return out;
  }
  if (out.bad !== null) return out;
  const s = atomSpreads(forces, n);
  let max = n ? -Infinity : 0;
  let sum = 0;
  for (let a = 0; a < n; a++) {
    sum += s[a];
    if (s[a] > max) {
      max = s[a];
      out.atom = a;
    }
  }
  out.max = max;
  out.mean = n ? sum / n : 0;
  return out;
}

/** The band of a frame spread in the window [lower, upper); non-finite counts as runaway. */
export function bandOf(spread: number, lower: number, upper: number): Band {
  if (!Number.isFinite(spread) || spread >= upper) return 'runaway';
  return spread < lower ? 'confident' : 'informative';
}

export interface CommitteeFigures {
  frames: number;
  models: number;
  /** Per frame, eV/Å (null for a frame with non-finite forces). */
  max_spread: (number | null)[];
  mean_spread: (number | null)[];
  /** Per frame, the atom with the largest spread (null with non-finite forces). */
  max_spread_atom: (number | null)[];
  band: Band[];
  bands: Record<Band, number>;
  first_runaway_frame: number | null;
  non_finite_frames: number;
  window: { lower: number; upper: number };
  files: FileSpan[];
  thresholds: { max_runaway_fraction: number };
}

/** Combine per-frame spreads into the committee verdict. Throws GateInputError for unusable input. */
export function summarizeCommittee(samples: CommitteeSample[], options: CommitteeOptions = {}, files: FileSpan[] = []): GateResult<CommitteeFigures> {
  const lower = options.lower ?? COMMITTEE_DEFAULTS.lower;
  const upper = options.upper ?? COMMITTEE_DEFAULTS.upper;
  const maxFrac = options.maxRunawayFraction ?? COMMITTEE_DEFAULTS.maxRunawayFraction;
  if (!(lower >= 0 && upper > lower && Number.isFinite(upper)))
    throw new GateInputError(`the band window must satisfy 0 <= lower < upper (finite), found lower ${lower}, upper ${upper}`);
  const models = samples.length ? samples[0].models : 0;
  const fig: CommitteeFigures = {
    frames: samples.length,
    models,
    max_spread: [],
    mean_spread: [],
    max_spread_atom: [],
    band: [],
    bands: { confident: 0, informative: 0, runaway: 0 },
    first_runaway_frame: null,
    non_finite_frames: 0,
    window: { lower, upper },
    files,
    thresholds: { max_runaway_fraction: maxFrac },
  };
  let firstBad: { index: number; what: string } | null = null;
  samples.forEach((s, k) => {
    if (s.missing !== null) throw new GateInputError(`${frameLabel(k, files)}: ${s.missing}`);
    if (s.models !== models)
      throw new GateInputError(`${frameLabel(k, files)}: has ${s.models} committee force arrays, frame 0 has ${models}`);
    const band = bandOf(s.bad !== null ? NaN : s.max, lower, upper);
    fig.max_spread.push(s.bad !== null ? null : s.max);
    fig.mean_spread.push(s.bad !== null ? null : s.mean);
    fig.max_spread_atom.push(s.bad !== null || s.atom < 0 ? null : s.atom);
    fig.band.push(band);
    fig.bands[band]++;
    if (band === 'runaway' && fig.first_runaway_frame === null) fig.first_runaway_frame = k;
    if (s.bad !== null) {
      fig.non_finite_frames++;
      firstBad ??= { index: k, what: s.bad };
    }
  });
  const j = new Judgement();
  if (samples.length === 0) j.fail('no frames to check');
  const { runaway, informative, confident } = fig.bands;
  if (runaway > 0) {
    const frac = runaway / samples.length;
    const what = `${runaway} of ${samples.length} frame(s) are runaway (spread >= ${fmt(upper)} eV/Å${fig.non_finite_frames ? ' or non-finite' : ''}), the first is ${frameLabel(fig.first_runaway_frame!, files)}`;
    if (frac > maxFrac) j.fail(`${what}; more than ${fmt(maxFrac * 100)}% of the frames`);
    else j.warn(what);
  }
  if (firstBad !== null) {
    const fb = firstBad as { index: number; what: string };
    j.note(`${frameLabel(fb.index, files)} has ${fb.what}`);
  }
  if (samples.length > 0)
    j.note(`${confident} confident, ${informative} informative, ${runaway} runaway in the window [${fmt(lower)}, ${fmt(upper)}) eV/Å`);
  return { gate: 'committee', verdict: j.verdict, reasons: j.reasons, figures: fig };
}

/** Models in the first frame of the first file that has one, and the file; null when every file is empty. */
async function peekModels(paths: string[], prefix: string): Promise<{ models: number; path: string } | null> {
  // only the committee arrays are parsed (up to PEEK_MODELS of them; more than that: the whole frame)
  const candidates = Array.from({ length: PEEK_MODELS }, (_, k) => `${prefix}${k}`);
  for (const path of paths) {
    for await (const frame of readFrames(path, { columns: candidates, positions: false })) {
      const models = countModels(frame, prefix);
      if (models < PEEK_MODELS) return { models, path };
      for await (const full of readFrames(path)) return { models: countModels(full, prefix), path };
    }
  }
  return null;
}

const PEEK_MODELS = 64;

/** The committee gate over extended XYZ files (frames numbered across files in order). */
export async function checkCommittee(paths: string[], options: CommitteeOptions = {}): Promise<GateResult<CommitteeFigures>> {
  const prefix = options.prefix ?? COMMITTEE_DEFAULTS.prefix;
  let models = options.models;
  if (models !== undefined && !(Number.isInteger(models) && models >= 2))
    throw new GateInputError(`the number of models must be an integer of at least 2, found ${models}`);
  if (models === undefined) {
    const peek = await peekModels(paths, prefix);
    if (peek === null)
      return summarizeCommittee([], options, paths.map((path) => ({ path, first_frame: 0, frames: 0 })));
    if (peek.models < 2)
      throw new GateInputError(
        `${peek.path}: the first frame has ${peek.models} committee force array(s) named '${prefix}0', '${prefix}1', ...; a spread needs at least 2`,
      );
    models = peek.models;
  }
  const columns = Array.from({ length: models }, (_, k) => `${prefix}${k}`);
  const { results, files } = await mapFiles<CommitteeSample>(
    paths,
    { module: import.meta.url, fn: 'committeeFrame', options: { prefix, models }, columns, usesIndex: false, positions: false },
    options.workers ?? defaultWorkers(),
  );
  return summarizeCommittee(results, options, files);
}
