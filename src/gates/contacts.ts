/**
 * contacts: are any two atoms unphysically close?
 *
 * Per frame: the closest pair (exact for any cell, an atom and its own periodic image included), the closest pair of
 * every species pair ("A-B", symbols sorted alphabetically), and every pair closer than its limit: an explicit
 * per-pair limit in Å, or scale x (r_cov,i + r_cov,j) with Cordero et al. 2008 covalent radii (elements.ts).
 * The default scale 0.5 is common practice (no single published source): bonded atoms sit near the sum of their
 * covalent radii, and half that sum is far closer than any physical contact.
 *
 * Pairs with hydrogen use max(scale, hydrogenScale) x (r_cov,i + r_cov,j), hydrogenScale 0.7 by default. Hydrogen's
 * radius (0.31 Å) is the smallest of all, so half the sum leaves limits of a few tenths of an Å (H-H 0.31 Å, O-H 0.485 Å)
 * that pass H-H at 0.40 Å and O-H at 0.55 Å, geometries no system a potential is trained on comes near. 0.7 is this
 * tool's choice, not a published figure: above 0.645 (0.40 / 0.62, to catch H-H at 0.40 Å) and 0.567 (0.55 / 0.97,
 * O-H at 0.55 Å), and low enough to leave every real bond to hydrogen a wide margin for thermal and zero-point motion:
 * limits H-H 0.434, O-H 0.679, N-H 0.714, C-H 0.749 Å against bonds of 0.741 (H2), 0.958 (water), 1.012 (ammonia) and
 * 1.087 Å (methane) (experimental geometries as tabulated in the NIST CCCBDB, values from memory, checked in
 * test/gates/contacts-molecules.test.ts against ASE's g2 set); hydrogen bonds (H...O 1.6-2.0 Å) are further still.
 * Heavy-atom pairs keep `scale`.
 *
 * A failure names its most severe violation (smallest distance / limit over all frames; ties: earliest frame, then
 * lowest i, j) as `worst_violation`; `min_distance` stays the closest pair of all, violating or not.
 */
import { covalentRadius } from '../atoms/elements.js';
import type { Frame } from '../atoms/frame.js';
import { minimumDistanceByGroup, speciesGroups } from '../atoms/neighbours.js';
import { defaultWorkers, firstNonFinite, frameLabel, mapFiles } from './frames.js';
import { GateInputError, type FileSpan, type GateResult } from './types.js';
import { Judgement, fmt } from './verdict.js';
import { CONTACTS_DEFAULTS } from './defaults.js';

export { CONTACTS_DEFAULTS };

export interface ContactsFrameOptions {
  scale?: number;
  /** Pairs with hydrogen: limit = max(scale, hydrogenScale) x sum of covalent radii (default CONTACTS_DEFAULTS.hydrogenScale). */
  hydrogenScale?: number;
  /** Limits in Å by species pair; keys "A-B" in either order (normalised to alphabetical). */
  pairLimits?: Record<string, number>;
  maxPerFrame?: number;
}

export interface ContactsOptions extends ContactsFrameOptions {
  maxViolations?: number;
  workers?: number;
}

export interface ContactViolation {
  i: number;
  j: number;
  /** Species of i and j. */
  species: [string, string];
  distance: number;
  limit: number;
}

/** One frame's contacts (small and clonable: what mapFrames returns from a worker). */
export interface ContactsSample {
  atoms: number;
  /** Closest pair, i <= j; null when the frame has no pair at all (a lone atom without periodicity). */
  min: { distance: number; i: number; j: number } | null;
  /** Closest pair per species pair "A-B" (i of species A, j of species B). */
  pairs: Record<string, { distance: number; i: number; j: number }>;
  /** Up to maxPerFrame violations, the most severe (smallest distance / limit) first. */
  violations: ContactViolation[];
  /** All violations in the frame. */
  violationCount: number;
  /** The limit used for each species pair of the frame. */
  limits: Record<string, number>;
  /** "non-finite positions (atom 3)" or null: a blown-up frame, not searched. */
  bad: string | null;
  /** Why the frame cannot be judged (no radius for a species, unusable cell), or null. */
  missing: string | null;
}

/** "B-A" -> "A-B": species pair key with the symbols sorted alphabetically. */
export function pairKey(a: string, b: string): string {
  return a <= b ? `${a}-${b}` : `${b}-${a}`;
}

/** Normalise user pair limits ("O-H": 0.8) to sorted keys; throws GateInputError on a malformed key or value. */
export function normalisePairLimits(limits: Record<string, number> | undefined): Record<string, number> {
  const out: Record<string, number> = {};
  for (const [k, v] of Object.entries(limits ?? {})) {
    const parts = k.split('-');
    if (parts.length !== 2 || parts.some((p) => p.trim() === ''))
      throw new GateInputError(`pair limit '${k}': expected two species joined by '-', such as O-H`);
    if (!(Number.isFinite(v) && v > 0)) throw new GateInputError(`pair limit '${k}': expected a positive distance in Å, found ${v}`);
    out[pairKey(parts[0].trim(), parts[1].trim())] = v;
  }
  return out;
}

/**
 * Limits for every species pair of a frame: explicit ones, else scale x (r_i + r_j), or max(scale, hydrogenScale) x
 * (r_i + r_j) for a pair with hydrogen. Throws GateInputError when a species has no radius and no explicit limit.
 */
export function pairLimitsFor(
  species: readonly string[],
  scale: number,
  explicit: Record<string, number>,
  hydrogenScale: number = CONTACTS_DEFAULTS.hydrogenScale,
): Record<string, number> {
  const names = [...new Set(species)].sort();
  const radius = new Map<string, number | Error>();
  for (const s of names) {
    try {
      radius.set(s, covalentRadius(s));
    } catch (err) {
      radius.set(s, err as Error);
    }
  }
  const out: Record<string, number> = {};
  for (let p = 0; p < names.length; p++) {
    for (let q = p; q < names.length; q++) {
      const key = `${names[p]}-${names[q]}`;
      if (explicit[key] !== undefined) {
        out[key] = explicit[key];
        continue;
      }
      const ra = radius.get(names[p]);
      const rb = radius.get(names[q]);
      const err = ra instanceof Error ? ra : rb instanceof Error ? rb : null;
      if (err) throw new GateInputError(`${err.message}; give an explicit limit for the pair ${key}`);
      const s = names[p] === 'H' || names[q] === 'H' ? Math.max(scale, hydrogenScale) : scale;
      out[key] = s * ((ra as number) + (rb as number));
    }
  }
  return out;
}

/** Normalised explicit limits (and their text) per options object (the same object is passed for every frame of a file). */
const normalisedLimits = new WeakMap<object, { limits: Record<string, number>; text: string }>();
const NO_LIMITS = { limits: {}, text: '{}' };
/** Limits per species set, scale and explicit limits (a file usually has one species set). */
const limitsCache = new Map<string, Record<string, number>>();

function limitsFor(names: string[], scale: number, hydrogenScale: number, pairLimits: Record<string, number> | undefined): Record<string, number> {
  let explicit = pairLimits === undefined ? NO_LIMITS : normalisedLimits.get(pairLimits);
  if (explicit === undefined) {
    const limits = normalisePairLimits(pairLimits);
    explicit = { limits, text: JSON.stringify(limits) };
    normalisedLimits.set(pairLimits!, explicit);
  }
  const key = `${scale}\u0000${hydrogenScale}\u0000${names.join('\u0000')}\u0000${explicit.text}`;
  let limits = limitsCache.get(key);
  if (limits === undefined) {
    limits = pairLimitsFor(names, scale, explicit.limits, hydrogenScale);
    if (limitsCache.size > 64) limitsCache.clear();
    limitsCache.set(key, limits);
  }
  // a copy: the sample is the caller's to keep
  return { ...limits };
}

/** The per-frame part of the contacts gate (pure; what mapFrames runs on each frame). */
export function contactsFrame(frame: Frame, _index: number, options: ContactsFrameOptions = {}): ContactsSample {
  const scale = options.scale ?? CONTACTS_DEFAULTS.scale;
  const hydrogenScale = options.hydrogenScale ?? CONTACTS_DEFAULTS.hydrogenScale;
  const cap = options.maxPerFrame ?? CONTACTS_DEFAULTS.maxPerFrame;
  const n = frame.species.length;
  const out: ContactsSample = { atoms: n, min: null, pairs: {}, violations: [], violationCount: 0, limits: {}, bad: null, missing: null };
  const k = firstNonFinite(frame.positions);
  if (k >= 0) {
    out.bad = `non-finite positions (atom ${Math.floor(k / 3)})`;
    return out;
  }
  const { names, group } = speciesGroups(frame.species);
  try {
    out.limits = limitsFor(names, scale, hydrogenScale, options.pairLimits);
  } catch (err) {
    out.missing = (err as Error).message;
    return out;
  }
  try {
    // a limit matrix by species index: no string work per pair
    const G = names.length;
    const limit = new Float64Array(G * G);
    for (let p = 0; p < G; p++) {
      for (let q = 0; q < G; q++) limit[p * G + q] = out.limits[pairKey(names[p], names[q])];
    }
    // The closest pair of every species pair and, from the same neighbour search, every pair closer than its limit.
    const res = minimumDistanceByGroup(frame, group, G, { limits: limit });
    const close = res.close!;
    out.violationCount = close.count;
    // Kept: the `cap` most severe by (distance / limit, i, j), whatever order the pairs come in.
    if (cap > 0 && close.count > 0) {
      const kept: { i: number; j: number; d: number; limit: number; r: number }[] = [];
      for (let q = 0; q < close.count; q++) {
        const i = close.i[q], j = close.j[q], d = close.d[q];
        const lim = limit[group[i] * G + group[j]];
        kept.push({ i, j, d, limit: lim, r: d / lim });
      }
      kept.sort((a, b) => a.r - b.r || a.i - b.i || a.j - b.j);
      out.violations = kept.slice(0, cap).map((v) => ({ i: v.i, j: v.j, species: [frame.species[v.i], frame.species[v.j]], distance: v.d, limit: v.limit }));
    }
    for (let p = 0; p < G; p++) {
      for (let q = p; q < G; q++) {
        const key = p * G + q;
        const d = res.distance[key];
        if (!(d < Infinity)) continue;
        const i = res.i[key];
        const j = res.j[key];
        out.pairs[`${names[p]}-${names[q]}`] = { distance: d, i, j };
        if (out.min === null || d < out.min.distance) out.min = { distance: d, i: Math.min(i, j), j: Math.max(i, j) };
      }
    }
  } catch (err) {
    out.missing = (err as Error).message;
  }
  return out;
}

export interface ContactsFigures {
  frames: number;
  /** Atoms in the first frame. */
  atoms: number | null;
  min_distance: { value: number; frame: number; i: number; j: number; species: [string, string] } | null;
  /** Closest distance per species pair over all frames, Å. */
  pair_min: Record<string, number>;
  /** Where each pair minimum is. */
  pair_min_at: Record<string, { frame: number; i: number; j: number }>;
  violations: { frame: number; i: number; j: number; species: [string, string]; distance: number; limit: number }[];
  /**
   * The most severe violation of all frames: smallest distance / limit (ties: earliest frame, then lowest i, j); null
   * without violations (or when no violation is kept, maxPerFrame 0). This, not min_distance, is the pair a failure names.
   */
  worst_violation: { frame: number; i: number; j: number; species: [string, string]; distance: number; limit: number; ratio: number } | null;
  /** All violations, including those not listed. */
  violation_count: number;
  violation_frames: number;
  first_violation_frame: number | null;
  /** Limits used per species pair, Å. */
  limits: Record<string, number>;
  scale: number;
  /** Pairs with hydrogen use max(scale, hydrogen_scale). */
  hydrogen_scale: number;
  first_bad_frame: number | null;
  files: FileSpan[];
}

/** Combine per-frame contacts (global frame order) into the verdict. Throws GateInputError for unusable input. */
export function summarizeContacts(samples: ContactsSample[], options: ContactsOptions = {}, files: FileSpan[] = []): GateResult<ContactsFigures> {
  const scale = options.scale ?? CONTACTS_DEFAULTS.scale;
  const hydrogenScale = options.hydrogenScale ?? CONTACTS_DEFAULTS.hydrogenScale;
  const maxTotal = options.maxViolations ?? CONTACTS_DEFAULTS.maxViolations;
  const fig: ContactsFigures = {
    frames: samples.length,
    atoms: samples.length ? samples[0].atoms : null,
    min_distance: null,
    pair_min: {},
    pair_min_at: {},
    violations: [],
    worst_violation: null,
    violation_count: 0,
    violation_frames: 0,
    first_violation_frame: null,
    limits: {},
    scale,
    hydrogen_scale: hydrogenScale,
    first_bad_frame: null,
    files,
  };
  let badCount = 0;
  let firstBadWhat = '';
  samples.forEach((s, f) => {
    if (s.missing !== null) throw new GateInputError(`${frameLabel(f, files)}: ${s.missing}`);
    if (s.bad !== null) {
      badCount++;
      if (fig.first_bad_frame === null) {
        fig.first_bad_frame = f;
        firstBadWhat = s.bad;
      }
      return;
    }
    // a pair key "A-B" names the species of i (A) and j (B) of its minimum
    const speciesOfPair = (key: string): [string, string] => key.split('-') as [string, string];
    for (const [key, c] of Object.entries(s.pairs)) {
      const cur = fig.pair_min[key];
      if (cur === undefined || c.distance < cur) {
        fig.pair_min[key] = c.distance;
        fig.pair_min_at[key] = { frame: f, i: c.i, j: c.j };
      }
      if (fig.min_distance === null || c.distance < fig.min_distance.value) {
        const [a, b] = speciesOfPair(key);
        const swap = c.i > c.j;
        fig.min_distance = { value: c.distance, frame: f, i: swap ? c.j : c.i, j: swap ? c.i : c.j, species: swap ? [b, a] : [a, b] };
      }
    }
    for (const [key, v] of Object.entries(s.limits)) fig.limits[key] = v;
    if (s.violationCount > 0) {
      fig.violation_count += s.violationCount;
      fig.violation_frames++;
      fig.first_violation_frame ??= f;
      // a frame's violations come most severe first; strictly smaller keeps the earliest frame on ties
      const v = s.violations[0];
      if (v !== undefined) {
        const ratio = v.distance / v.limit;
        if (fig.worst_violation === null || ratio < fig.worst_violation.ratio)
          fig.worst_violation = { frame: f, i: v.i, j: v.j, species: v.species, distance: v.distance, limit: v.limit, ratio };
      }
      for (const v of s.violations) {
        if (fig.violations.length >= maxTotal) break;
        fig.violations.push({ frame: f, i: v.i, j: v.j, species: v.species, distance: v.distance, limit: v.limit });
      }
    }
  });
  const j = new Judgement();
  if (samples.length === 0) j.fail('no frames to check');
  if (fig.first_bad_frame !== null)
    j.fail(`${badCount} frame(s) have non-finite positions (the run blew up); the first is ${frameLabel(fig.first_bad_frame, files)} with ${firstBadWhat}`);
  if (fig.violation_count > 0) {
    const first = fig.violations[0];
    j.fail(
      `${fig.violation_count} pair(s) in ${fig.violation_frames} frame(s) are closer than their limit; the first frame with one is ${frameLabel(fig.first_violation_frame!, files)}` +
        (first ? `, e.g. atoms ${first.i} and ${first.j} (${first.species.join('-')}) at ${fmt(first.distance)} Å, limit ${fmt(first.limit)} Å` : ''),
    );
    if (fig.violations.length < fig.violation_count) j.note(`${fig.violations.length} of ${fig.violation_count} violations are listed`);
  }
  if (fig.worst_violation) {
    // a failure names its violating pair, never the closest pair of another species pair that is within its limit
    const w = fig.worst_violation;
    j.note(
      `most severe violation: ${fmt(w.distance)} Å between atoms ${w.i} and ${w.j} (${w.species.join('-')}) in ${frameLabel(w.frame, files)}, limit ${fmt(w.limit)} Å (${fmt(w.ratio, 3)} of the limit)`,
    );
  } else if (fig.min_distance) {
    const m = fig.min_distance;
    const key = pairKey(m.species[0], m.species[1]);
    const verb = j.verdict === 'pass' ? 'every pair is at or beyond its limit; closest' : 'closest';
    j.note(`${verb}: ${fmt(m.value)} Å between atoms ${m.i} and ${m.j} (${m.species.join('-')}) in ${frameLabel(m.frame, files)}, limit ${fmt(fig.limits[key] ?? NaN)} Å`);
  }
  return { gate: 'contacts', verdict: j.verdict, reasons: j.reasons, figures: fig };
}

/** The contacts gate over extended XYZ files (frames numbered across files in order). */
export async function checkContacts(paths: string[], options: ContactsOptions = {}): Promise<GateResult<ContactsFigures>> {
  const scale = options.scale ?? CONTACTS_DEFAULTS.scale;
  if (!(Number.isFinite(scale) && scale > 0)) throw new GateInputError(`scale must be a positive number, found ${scale}`);
  const hydrogenScale = options.hydrogenScale ?? CONTACTS_DEFAULTS.hydrogenScale;
  if (!(Number.isFinite(hydrogenScale) && hydrogenScale > 0))
    throw new GateInputError(`hydrogen scale must be a positive number, found ${hydrogenScale}`);
  const pairLimits = normalisePairLimits(options.pairLimits);
  const { results, files } = await mapFiles<ContactsSample>(
    paths,
    {
      module: import.meta.url,
      fn: 'contactsFrame',
      options: { scale, hydrogenScale, pairLimits, maxPerFrame: options.maxPerFrame ?? CONTACTS_DEFAULTS.maxPerFrame },
      columns: [],
      usesIndex: false,
    },
    options.workers ?? defaultWorkers(),
  );
  return summarizeContacts(results, { ...options, scale, hydrogenScale }, files);
}
