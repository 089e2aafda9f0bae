/**
 * Spread calibration: how far the committee's spread is from the true force error, measured on the frames
 * a round has just paid to label.
 *
 * For each labeled frame that came from a trajectory (with the committee's forces forces_0 ... forces_{M-1}
 * of the models that drove it) the true error is the largest per-atom deviation of the committee mean
 * from the reference force, max_i |mean_m F_i^m - F_i^ref|, and the spread is the committee's own
 * estimate of it, max_i sqrt(mean_m |F_i^m - mean_m F_i^m|^2) (the glossary's spread). Their ratio is 1 for
 * a committee whose spread is an honest error bar, above 1 for an overconfident one.
 *
 * The summary is the median and the 90th percentile of the per-frame ratios (quantiles of type 7 in
 * Hyndman & Fan's scheme, the default of R and NumPy), so one odd frame does not move it. Frames whose spread is zero (or not finite) give no ratio.
 * Pure: arrays in, numbers out.
 */
import { atomSpreads } from '../gates/committee.js';

export interface CalibrationSample {
  /** Largest per-atom |committee mean - reference| force, eV/Å. */
  error: number;
  /** The frame's spread, eV/Å. */
  spread: number;
  /** error / spread. */
  ratio: number;
}

export interface CalibrationSummary {
  /** Frames with a usable ratio. */
  frames: number;
  median: number | null;
  p90: number | null;
  /** Median of the true errors and of the spreads, eV/Å (for the report). */
  median_error: number | null;
  median_spread: number | null;
  /** Frames whose error exceeded their spread (ratio > 1). */
  above_one: number;
}

/**
 * One frame: committee forces (M arrays of 3N), reference forces (3N). Returns null when the spread is
 * zero or not finite, or any number is not finite.
 */
export function calibrateFrame(committee: ArrayLike<number>[], reference: ArrayLike<number>, atoms: number): CalibrationSample | null {
  const m = committee.length;
  if (m < 2 || reference.length !== 3 * atoms) return null;
  const spreads = atomSpreads(committee, atoms);
  let spread = 0;
  let error = 0;
  for (let a = 0; a < atoms; a++) {
    if (!(spreads[a] >= 0)) return null;
    if (spreads[a] > spread) spread = spreads[a];
    let d2 = 0;
    for (let k = 0; k < 3; k++) {
      let mean = 0;
      for (let j = 0; j < m; j++) mean += committee[j][3 * a + k];
      mean /= m;
      const d = mean - reference[3 * a + k];
      d2 += d * d;
    }
    const d = Math.sqrt(d2);
    if (!Number.isFinite(d)) return null;
    if (d > error) error = d;
  }
  if (!(spread > 0) || !Number.isFinite(spread)) return null;
  return { error, spread, ratio: error / spread };
}

/** Quantile q of sorted values by linear interpolation between order statistics (Hyndman & Fan 1996, type 7). */
export function quantile(sorted: ArrayLike<number>, q: number): number {
  const n = sorted.length;
  if (n === 0) return NaN;
  const h = (n - 1) * q;
  const lo = Math.floor(h);
  const hi = Math.min(n - 1, lo + 1);
  return sorted[lo] + (h - lo) * (sorted[hi] - sorted[lo]);
}

export function summarizeCalibration(samples: CalibrationSample[]): CalibrationSummary {
  const ratios = Float64Array.from(samples.map((s) => s.ratio)).sort();
  const errors = Float64Array.from(samples.map((s) => s.error)).sort();
  const spreads = Float64Array.from(samples.map((s) => s.spread)).sort();
  const n = ratios.length;
  return {
    frames: n,
    median: n ? quantile(ratios, 0.5) : null,
    p90: n ? quantile(ratios, 0.9) : null,
    median_error: n ? quantile(errors, 0.5) : null,
    median_spread: n ? quantile(spreads, 0.5) : null,
    above_one: samples.filter((s) => s.ratio > 1).length,
  };
}

/**
 * The window used for the bands when the campaign asks for calibration: the spread thresholds divided by
 * the measured ratio r (the true error is about r x spread, so a spread of lower / r means a true error of
 * about lower). Unchanged without a usable ratio.
 */
export function calibratedWindow(window: { lower: number; upper: number }, ratio: number | null | undefined): { lower: number; upper: number; ratio: number | null } {
  if (ratio === null || ratio === undefined || !(ratio > 0) || !Number.isFinite(ratio)) return { ...window, ratio: null };
  return { lower: window.lower / ratio, upper: window.upper / ratio, ratio };
}
