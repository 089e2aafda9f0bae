/**
 * Every gate's default thresholds, in one small module: the command line shows them in its help without loading the
 * gates themselves (each gate module re-exports its own).
 */

export const CONTACTS_DEFAULTS = {
  /** Limit = scale x sum of covalent radii (common practice). */
  scale: 0.5,
  /** Violations kept per frame (the closest relative to their limits); all are counted. */
  maxPerFrame: 10,
  /** Violations kept in total (earliest frames first); all are counted. */
  maxViolations: 1000,
} as const;

/**
 * Default limits. Common practice (orders of magnitude, no single published source; set your own):
 * a well-behaved NVE run with a sensible time step drifts far less than 0.1 meV/atom/ps (i.e. 100 meV/atom/ns),
 * and its total energy stays within a few meV/atom of the start.
 */
export const DRIFT_DEFAULTS = {
  /** |slope| above this warns (meV/atom/ps). */
  slopeWarn: 0.1,
  /** |slope| above this fails (meV/atom/ps). */
  slopeFail: 1.0,
  /** max |E(t) - E(0)| above this warns (meV/atom). */
  excursionWarn: 10,
  /** max |E(t) - E(0)| above this fails (meV/atom). */
  excursionFail: 100,
} as const;

/**
 * Default limits on the RMSEs. Common practice, orders of magnitude only (no single published source): potentials
 * in use typically reach a few meV/atom in energy and 50-150 meV/Å in forces; set limits fit for your system.
 */
export const ERRORS_DEFAULTS = {
  energyRmseWarn: 10,
  energyRmseFail: 50,
  forceRmseWarn: 150,
  forceRmseFail: 500,
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
