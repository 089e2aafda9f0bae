/**
 * committee: how much the committee's models disagree on each frame's forces.
 *
 * Per atom the spread is sqrt( (1/M) sum_m |F_i^m - mean_m F_i|^2 ) over the M per-atom arrays forces_0 ... forces_{M-1}
 * (population form, 1/M, as in the glossary of design.md); a frame's spread is the max over its atoms, and its mean over
 * atoms is reported beside it. Each frame falls in a band of the window [lower, upper): confident (< lower),
 * informative (lower <= spread < upper: worth labelling), runaway (>= upper, or non-finite: the run left the known region).
 *
 * Every member k < M must be on every frame (M from the caller, e.g. the campaign's committee size; else the highest
 * `${prefix}k` of the first frame plus one, so that forces_0, forces_2, forces_3 is a committee of 4 with forces_1
 * missing). A frame that lacks a member, or has one it should not (k >= M), is incomplete: the gate fails naming the
 * frame and the keys, and the frame gets no spread (null) and counts as runaway, never as a judged frame.
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
  /** Number of models M; default: the highest `${prefix}k` of the frame plus one. */
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
  /** Members expected (M). */
  models: number;
  /** Indices k of the `${prefix}k` arrays the frame has (of those read), ascending. */
  members: number[];
  /** Expected members the frame lacks ("forces_1") and members it should not have (k >= M); both empty when complete. */
  absent: string[];
  extra: string[];
  /** Max over atoms of the per-atom spread, eV/Å (NaN when a force is non-finite). */
  max: number;
  /** Mean over atoms, eV/Å. */
  mean: number;
  /** Atom with the largest spread (-1 for no atoms). */
  atom: number;
  /** "non-finite forces_2 (atom 7)" or null. */
  bad: string | null;
  /** Why the frame cannot be judged (incomplete committee, array of the wrong shape...), or null. */
  missing: string | null;
}

/** Indices k of the frame's arrays named `${prefix}k` (k written plainly: 0, 1, 12; not 01), ascending. */
export function committeeMembers(frame: Frame, prefix: string = COMMITTEE_DEFAULTS.prefix): number[] {
  const out: number[] = [];
  for (const name of frame.arrays.keys()) {
    if (!name.startsWith(prefix)) continue;
    const rest = name.slice(prefix.length);
    if (/^(0|[1-9][0-9]{0,8})$/.test(rest)) out.push(Number(rest));
  }
  return out.sort((a, b) => a - b);
}

/** The keys of members 0 ... M-1 that `members` lacks, and the members >= M it has. */
export function memberGaps(members: readonly number[], models: number, prefix: string = COMMITTEE_DEFAULTS.prefix): { absent: string[]; extra: string[] } {
  const have = new Set(members);
  const absent: string[] = [];
  for (let k = 0; k < models; k++) if (!have.has(k)) absent.push(`${prefix}${k}`);
  const extra = members.filter((k) => k >= models).map((k) => `${prefix}${k}`);
  return { absent, extra };
}

/** "3 committee force arrays (forces_0, forces_2, forces_3) for 4 models: forces_1 missing" */
function incompleteText(members: readonly number[], models: number, absent: string[], extra: string[], prefix: string): string {
  const present = members.map((k) => `${prefix}${k}`);
  const parts: string[] = [];
  if (absent.length) parts.push(`${absent.join(', ')} missing`);
  if (extra.length) parts.push(`${extra.join(', ')} unexpected`);
  return (
    `${present.length} committee force array(s)${present.length ? ` (${present.join(', ')})` : ''} for ${models} models ` +
    `(${prefix}0 ... ${prefix}${models - 1}): ${parts.join('; ')}`
  );
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
  const members = committeeMembers(frame, prefix);
  const m = options.models ?? (members.length ? members[members.length - 1] + 1 : 0);
  const { absent, extra } = memberGaps(members, m, prefix);
  const out: CommitteeSample = { atoms: n, models: m, members, absent, extra, max: NaN, mean: NaN, atom: -1, bad: null, missing: null };
  if (absent.length || extra.length) {
    out.missing = incompleteText(members, m, absent, extra, prefix);
    return out;
  }
  const forces: Float64Array[] = [];
  for (let k = 0; k < m; k++) {
    const col = frame.arrays.get(`${prefix}${k}`)!;
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
  /** Frames that lack a member k < M or have one k >= M (all counted; listed up to MAX_INCOMPLETE_LISTED). */
  incomplete_frames: number;
  first_incomplete_frame: number | null;
  /** Per incomplete frame: the member arrays it has, those it lacks, those it should not have. */
  incomplete: { frame: number; present: string[]; missing: string[]; extra: string[] }[];
  window: { lower: number; upper: number };
  files: FileSpan[];
  thresholds: { max_runaway_fraction: number };
}

/** Incomplete frames listed in the figures at most (all are counted). */
export const MAX_INCOMPLETE_LISTED = 1000;

/**
 * Combine per-frame spreads into the committee verdict. M is options.models, else frame 0's; a frame whose members
 * are not exactly 0 ... M-1 fails the gate. Throws GateInputError for unusable input (an array of the wrong shape, M < 2).
 */
export function summarizeCommittee(samples: CommitteeSample[], options: CommitteeOptions = {}, files: FileSpan[] = []): GateResult<CommitteeFigures> {
  const lower = options.lower ?? COMMITTEE_DEFAULTS.lower;
  const upper = options.upper ?? COMMITTEE_DEFAULTS.upper;
  const maxFrac = options.maxRunawayFraction ?? COMMITTEE_DEFAULTS.maxRunawayFraction;
  if (!(lower >= 0 && upper > lower && Number.isFinite(upper)))
    throw new GateInputError(`the band window must satisfy 0 <= lower < upper (finite), found lower ${lower}, upper ${upper}`);
  const prefix = options.prefix ?? COMMITTEE_DEFAULTS.prefix;
  const models = options.models ?? (samples.length ? samples[0].models : 0);
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
    incomplete_frames: 0,
    first_incomplete_frame: null,
    incomplete: [],
    window: { lower, upper },
    files,
    thresholds: { max_runaway_fraction: maxFrac },
  };
  let firstBad: { index: number; what: string } | null = null;
  let firstIncomplete = '';
  samples.forEach((s, k) => {
    // members against the committee's M (a frame judged on its own may have taken another M from its own arrays)
    const { absent, extra } = s.models === models ? s : memberGaps(s.members, models, prefix);
    const incomplete = absent.length > 0 || extra.length > 0;
    if (incomplete) {
      fig.incomplete_frames++;
      if (fig.first_incomplete_frame === null) {
        fig.first_incomplete_frame = k;
        firstIncomplete = incompleteText(s.members, models, absent, extra, prefix);
      }
      if (fig.incomplete.length < MAX_INCOMPLETE_LISTED)
        fig.incomplete.push({ frame: k, present: s.members.map((m) => `${prefix}${m}`), missing: absent, extra });
    } else if (s.missing !== null) throw new GateInputError(`${frameLabel(k, files)}: ${s.missing}`);
    const unjudged = incomplete || s.bad !== null;
    const band = bandOf(unjudged ? NaN : s.max, lower, upper);
    fig.max_spread.push(unjudged ? null : s.max);
    fig.mean_spread.push(unjudged ? null : s.mean);
    fig.max_spread_atom.push(unjudged || s.atom < 0 ? null : s.atom);
    fig.band.push(band);
    fig.bands[band]++;
    if (band === 'runaway' && fig.first_runaway_frame === null) fig.first_runaway_frame = k;
    if (!incomplete && s.bad !== null) {
      fig.non_finite_frames++;
      firstBad ??= { index: k, what: s.bad };
    }
  });
  const j = new Judgement();
  if (samples.length === 0) j.fail('no frames to check');
  if (fig.incomplete_frames > 0)
    j.fail(
      `${fig.incomplete_frames} of ${samples.length} frame(s) do not carry exactly the committee's ${models} force arrays; ` +
        `the first is ${frameLabel(fig.first_incomplete_frame!, files)} with ${firstIncomplete}`,
    );
  const { runaway, informative, confident } = fig.bands;
  if (runaway > 0) {
    const frac = runaway / samples.length;
    const also = [fig.non_finite_frames ? 'non-finite' : '', fig.incomplete_frames ? 'incomplete' : ''].filter(Boolean).map((x) => ` or ${x}`).join('');
    const what = `${runaway} of ${samples.length} frame(s) are runaway (spread >= ${fmt(upper)} eV/Å${also}), the first is ${frameLabel(fig.first_runaway_frame!, files)}`;
    if (frac > maxFrac) j.fail(`${what}; more than ${fmt(maxFrac * 100)}% of the frames`);
    else j.warn(what);
  }
  if (firstBad !== null) {
    const fb = firstBad as { index: number; what: string };
    j.note(`${frameLabel(fb.index, files)} has ${fb.what}`);
  }
  if (fig.incomplete.length < fig.incomplete_frames) j.note(`${fig.incomplete.length} of ${fig.incomplete_frames} incomplete frames are listed`);
  if (samples.length > 0)
    j.note(`${confident} confident, ${informative} informative, ${runaway} runaway in the window [${fmt(lower)}, ${fmt(upper)}) eV/Å`);
  return { gate: 'committee', verdict: j.verdict, reasons: j.reasons, figures: fig };
}

/**
 * Members of the first frame of the first file that has one, and the file; null when every file is empty. M is the
 * highest member plus one (forces_0, forces_2, forces_3: 4 models, forces_1 missing).
 */
async function peekMembers(paths: string[], prefix: string): Promise<{ members: number[]; path: string } | null> {
  // only the committee arrays are parsed (up to PEEK_MODELS of them; more than that: the whole frame)
  const candidates = memberColumns(prefix, PEEK_MODELS);
  for (const path of paths) {
    for await (const frame of readFrames(path, { columns: candidates, positions: false })) {
      const members = committeeMembers(frame, prefix);
      if (!members.includes(PEEK_MODELS - 1)) return { members, path };
      for await (const full of readFrames(path)) return { members: committeeMembers(full, prefix), path };
    }
  }
  return null;
}

/**
 * Member arrays read per frame: `${prefix}0` ... up to at least PEEK_MODELS of them, so that an unexpected member
 * k >= M is seen too (for k < max(M, PEEK_MODELS); arrays not asked for are skipped unparsed, and absent ones cost nothing).
 */
const PEEK_MODELS = 64;

function memberColumns(prefix: string, count: number): string[] {
  return Array.from({ length: count }, (_, k) => `${prefix}${k}`);
}

/** The committee gate over extended XYZ files (frames numbered across files in order). */
export async function checkCommittee(paths: string[], options: CommitteeOptions = {}): Promise<GateResult<CommitteeFigures>> {
  const prefix = options.prefix ?? COMMITTEE_DEFAULTS.prefix;
  let models = options.models;
  if (models !== undefined && !(Number.isInteger(models) && models >= 2))
    throw new GateInputError(`the number of models must be an integer of at least 2, found ${models}`);
  if (models === undefined) {
    const peek = await peekMembers(paths, prefix);
    if (peek === null)
      return summarizeCommittee([], options, paths.map((path) => ({ path, first_frame: 0, frames: 0 })));
    const m = peek.members.length ? peek.members[peek.members.length - 1] + 1 : 0;
    if (m < 2)
      throw new GateInputError(
        `${peek.path}: the first frame has ${peek.members.length} committee force array(s) named '${prefix}0', '${prefix}1', ...; a spread needs at least 2`,
      );
    models = m;
  }
  const columns = memberColumns(prefix, Math.max(models, PEEK_MODELS));
  const { results, files } = await mapFiles<CommitteeSample>(
    paths,
    { module: import.meta.url, fn: 'committeeFrame', options: { prefix, models }, columns, usesIndex: false, positions: false },
    options.workers ?? defaultWorkers(),
  );
  return summarizeCommittee(results, { ...options, prefix, models }, files);
}
