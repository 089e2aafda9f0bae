/**
 * The one table of gate limits: every warn/fail pair that `ratchet check` and the campaign's validate gate judge
 * by. The campaign schema takes its defaults from here and `ratchet check` its option defaults, so a file checked
 * by hand with no options is judged exactly as a campaign with default settings judges it. The names are the
 * same everywhere: the campaign key (`stages.validate.errors.force_rmse`, `stages.validate.max_drift`), the
 * command-line options (`--force-rmse-warn`, `--force-rmse-fail`, `--max-drift-warn` ...) and the `limits` object
 * of `ratchet check --json`.
 *
 * A figure above its fail limit fails; otherwise above its warn limit it warns. null = not checked.
 * Giving only one of the two moves the other's default just enough to keep warn <= fail (a fail limit below the
 * default warn limit lowers the warn limit to it); giving both with warn above fail is refused.
 *
 * The default values are common practice (orders of magnitude from potentials in use, no single published
 * source): set limits fit for your own system.
 */
import { GateInputError } from './types.js';

/** A warn and a fail limit; null = not checked. */
export interface Limit {
  warn: number | null;
  fail: number | null;
}

/** What a user may give for a limit: a number (the fail limit) or either or both of warn and fail. */
export type LimitInput = number | { warn?: number | null; fail?: number | null };

export interface LimitSpec extends Limit {
  /** What is limited, in the words of the reasons ("energy RMSE"). */
  what: string;
  unit: string;
}

export const LIMITS = {
  /** Energy RMSE per atom on held-out frames, meV/atom: a few meV/atom is what potentials in use reach. */
  energy_rmse: { what: 'energy RMSE', unit: 'meV/atom', warn: 5, fail: 10 },
  energy_mae: { what: 'energy MAE', unit: 'meV/atom', warn: null, fail: null },
  /** Force-component RMSE, meV/Å, judged overall and for each element: 50-150 meV/Å is usual. */
  force_rmse: { what: 'force RMSE', unit: 'meV/Å', warn: 100, fail: 150 },
  force_mae: { what: 'force MAE', unit: 'meV/Å', warn: null, fail: null },
  /** Stress RMSE over the six Voigt components, GPa (unchecked unless set). */
  stress_rmse: { what: 'stress RMSE', unit: 'GPa', warn: null, fail: null },
  /**
   * |slope| of total energy per atom in a constant-energy run, meV/atom/ps: a well-behaved run with a sensible time
   * step drifts far less than 0.1 meV/atom/ps (100 meV/atom/ns).
   */
  max_drift: { what: 'energy drift', unit: 'meV/atom/ps', warn: 0.1, fail: 1 },
  /** Largest |E(t) - E(0)| of total energy per atom, meV/atom. */
  max_excursion: { what: 'total energy excursion', unit: 'meV/atom', warn: 10, fail: 100 },
} as const satisfies Record<string, LimitSpec>;

export type LimitName = keyof typeof LIMITS;
export const ERRORS_LIMIT_NAMES = ['energy_rmse', 'energy_mae', 'force_rmse', 'force_mae', 'stress_rmse'] as const;
export const DRIFT_LIMIT_NAMES = ['max_drift', 'max_excursion'] as const;
export type ErrorsLimitName = (typeof ERRORS_LIMIT_NAMES)[number];
export type DriftLimitName = (typeof DRIFT_LIMIT_NAMES)[number];
export type ErrorsLimits = Record<ErrorsLimitName, Limit>;
export type DriftLimits = Record<DriftLimitName, Limit>;

/**
 * How much data a verdict needs. Common practice (no single published source):
 * - errors: fewer than 10 held-out frames or 100 force components is too few for an RMSE to mean much; the gate
 *   warns (a warn never hides a fail);
 * - drift: a slope needs at least 10 frames over at least 1 ps; less fails. The argon demo (1000 steps of 5 fs,
 *   a frame every 20) gives 51 frames over 5 ps; the default validate run (1000 steps of 1 fs, a frame every 10)
 *   gives 101 frames over 1 ps.
 */
export const SAMPLE_LIMITS = {
  errors_min_frames: 10,
  errors_min_force_components: 100,
  drift_min_frames: 10,
  /** ps */
  drift_min_span: 1,
} as const;

/** Command-line option stem of a limit: force_rmse -> force-rmse. */
export const optionStem = (name: string): string => name.replace(/_/g, '-');

/**
 * The limit in force from what was given and the table's default. `where` names the key or option in messages
 * (e.g. "--force-rmse-warn" / "stages.validate.errors.force_rmse.warn"). Throws GateInputError when warn is
 * above fail or a value is not a positive number.
 */
export function resolveLimit(
  name: LimitName,
  given: LimitInput | undefined,
  where: (which: 'warn' | 'fail') => string = (w) => `${name}.${w}`,
): Limit {
  const d = LIMITS[name];
  const g = typeof given === 'number' ? { fail: given } : (given ?? {});
  for (const which of ['warn', 'fail'] as const) {
    const v = g[which];
    if (v !== undefined && v !== null && !(Number.isFinite(v) && v > 0))
      throw new GateInputError(`${where(which)}: expected a positive number in ${d.unit}, found ${v}`);
  }
  const hasWarn = g.warn !== undefined;
  const hasFail = g.fail !== undefined;
  let warn: number | null = hasWarn ? (g.warn as number | null) : d.warn;
  let fail: number | null = hasFail ? (g.fail as number | null) : d.fail;
  if (hasWarn && hasFail) {
    if (warn !== null && fail !== null && warn > fail)
      throw new GateInputError(`${where('warn')} ${warn} is above ${where('fail')} ${fail}: the warn limit must not be above the fail limit`);
  } else if (hasFail && fail !== null && warn !== null && warn > fail) warn = fail;
  else if (hasWarn && warn !== null && fail !== null && warn > fail) fail = warn;
  return { warn, fail };
}

/** Every limit of one gate, resolved: defaults for the names not given. */
export function resolveLimits<N extends LimitName>(
  names: readonly N[],
  given: Partial<Record<N, LimitInput>> = {},
  where?: (name: N, which: 'warn' | 'fail') => string,
): Record<N, Limit> {
  const out = {} as Record<N, Limit>;
  for (const n of names) out[n] = resolveLimit(n, given[n], where ? (w) => where(n, w) : undefined);
  return out;
}

/** The table's defaults of one gate (what a campaign without the keys and `ratchet check` without options use). */
export function defaultLimits<N extends LimitName>(names: readonly N[]): Record<N, Limit> {
  return resolveLimits(names);
}
