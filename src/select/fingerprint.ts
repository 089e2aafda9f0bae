import type { Frame } from '../atoms/frame.js';
import { forEachPair } from '../atoms/neighbours.js';

export interface FingerprintOptions {
  /** Species of the campaign; pairs are formed from these, sorted. */
  species: string[];
  /** Largest distance counted, Å (default 6, common practice for local environments). */
  cutoff?: number;
  /** Histogram bins per species pair (default 24). */
  bins?: number;
}

/**
 * A cheap structural fingerprint, invariant under permutation of atoms, translation and rotation:
 * for each species pair (A-B with A <= B alphabetically), a histogram of pair distances within the cutoff,
 * counted per atom, with linear interpolation between neighbouring bins so that a small move of an atom
 * changes the fingerprint a little rather than jumping a whole bin. Used to spread selected frames out.
 */
export function pairDistanceFingerprint(frame: Frame, opts: FingerprintOptions): Float64Array {
  const species = [...new Set(opts.species)].sort();
  const cutoff = opts.cutoff ?? 6;
  const bins = opts.bins ?? 24;
  const s = species.length;
  const kind = new Int32Array(frame.species.length);
  frame.species.forEach((sym, i) => {
    const k = species.indexOf(sym);
    if (k < 0) throw new Error(`fingerprint: atom ${i} is ${sym}, which is not among the campaign's species (${species.join(', ')})`);
    kind[i] = k;
  });
  // pair (a, b) with a <= b -> block index
  const block = (a: number, b: number) => (a <= b ? a * s - (a * (a - 1)) / 2 + (b - a) : b * s - (b * (b - 1)) / 2 + (a - b));
  const out = new Float64Array(((s * (s + 1)) / 2) * bins);
  const width = cutoff / bins;
  forEachPair(frame, cutoff, (i, j, d) => {
    const x = d / width - 0.5;
    const lo = Math.floor(x);
    const t = x - lo;
    const base = block(kind[i], kind[j]) * bins;
    // each pair counts for both of its atoms, except an atom's pair with its own image, counted once per image pair
    const weight = i === j ? 1 : 2;
    if (lo >= 0) out[base + lo] += weight * (1 - t);
    if (lo + 1 < bins) out[base + lo + 1] += weight * t;
    else if (lo >= 0) out[base + lo] += weight * t;
  });
  const n = frame.species.length || 1;
  for (let k = 0; k < out.length; k++) out[k] /= n;
  return out;
}
