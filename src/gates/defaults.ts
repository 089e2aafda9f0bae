/**
 * Every gate's default thresholds, in one small module: the command line shows them in its help without loading the
 * gates themselves (each gate module re-exports its own). The warn/fail limits live in one table, limits.ts.
 */
import { LIMITS, SAMPLE_LIMITS } from './limits.js';

export * from './limits.js';

export const CONTACTS_DEFAULTS = {
  /** Limit = scale x sum of covalent radii (common practice). */
  scale: 0.5,
  /**
   * Pairs with hydrogen: limit = max(scale, hydrogenScale) x sum of covalent radii. This tool's choice, not a published
   * figure: 0.5 gives H-H 0.31 Å and O-H 0.485 Å, which let through H-H at 0.40 Å and O-H at 0.55 Å; 0.7 gives H-H
   * 0.434 Å, O-H 0.679 Å, C-H 0.749 Å, N-H 0.714 Å, all far below the shortest real bonds (H2 0.741 Å, O-H 0.96 Å,
   * N-H 1.01 Å, C-H 1.09 Å) and hydrogen bonds (H...O 1.6-2.0 Å). See contacts.ts.
   */
  hydrogenScale: 0.7,
  /** Violations kept per frame (the closest relative to their limits); all are counted. */
  maxPerFrame: 10,
  /** Violations kept in total (earliest frames first); all are counted. */
  maxViolations: 1000,
} as const;

/** Drift: the limits and sample sizes of the one table (limits.ts), under the names the gate's options use. */
export const DRIFT_DEFAULTS = {
  /** |slope| above this warns when it is also more than 2 standard errors from zero (meV/atom/ps). */
  slopeWarn: LIMITS.max_drift.warn,
  /** |slope| above this fails (meV/atom/ps). */
  slopeFail: LIMITS.max_drift.fail,
  /** max |E(t) - E(0)| above this warns (meV/atom). */
  excursionWarn: LIMITS.max_excursion.warn,
  /** max |E(t) - E(0)| above this fails (meV/atom). */
  excursionFail: LIMITS.max_excursion.fail,
  /** Fewer usable frames than this fails. */
  minFrames: SAMPLE_LIMITS.drift_min_frames,
  /** A run shorter than this (ps) fails. */
  minSpan: SAMPLE_LIMITS.drift_min_span,
} as const;

/** Errors: the limits and sample sizes of the one table (limits.ts). */
export const ERRORS_DEFAULTS = {
  energyRmseWarn: LIMITS.energy_rmse.warn,
  energyRmseFail: LIMITS.energy_rmse.fail,
  forceRmseWarn: LIMITS.force_rmse.warn,
  forceRmseFail: LIMITS.force_rmse.fail,
  /** Fewer judged frames than this warns (too few to trust). */
  minFrames: SAMPLE_LIMITS.errors_min_frames,
  /** Fewer force components than this warns (too few to trust). */
  minForceComponents: SAMPLE_LIMITS.errors_min_force_components,
  /** Å; positions written with 5 or more decimals agree to this. */
  positionTolerance: 1e-4,
} as const;

/**
 * Default window and limit. The window [0.05, 0.5) eV/Å is common practice for committee force deviations (no single
 * published source; set it from your own system). maxRunawayFraction is this tool's choice, not a published figure.
 */
export const COMMITTEE_DEFAULTS = {
  prefix: 'forces_',
  lower: 0.05,
  upper: 0.5,
  /** More than this fraction of frames in the runaway band fails; any runaway frame warns. */
  maxRunawayFraction: 0.5,
} as const;
