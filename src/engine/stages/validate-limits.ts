/**
 * The campaign's validate limits as the options of the errors and drift gates: the one place where the campaign
 * path meets the gates, so `ratchet check errors|drift` with the same limits judges the same files the same way.
 */
import type { ValidateStage } from '../../campaign/schema.js';
import type { DriftOptions } from '../../gates/drift.js';
import type { ErrorsOptions } from '../../gates/errors.js';

/** Options of the errors gate from stages.validate.errors. */
export function errorsGateOptions(v: Pick<ValidateStage, 'errors'>): ErrorsOptions {
  return {
    limits: { ...v.errors },
    limitName: (name, which) => `stages.validate.errors.${name}.${which}`,
  };
}

/** Options of the drift gate from stages.validate (time step in fs for runs whose frames carry no time). */
export function driftGateOptions(
  v: Pick<ValidateStage, 'max_drift' | 'max_excursion' | 'drift_min_frames' | 'drift_min_span'>,
  timestep?: number,
): DriftOptions {
  return {
    timestep,
    limits: { max_drift: v.max_drift, max_excursion: v.max_excursion },
    limitName: (name, which) => `stages.validate.${name}.${which}`,
    minFrames: v.drift_min_frames,
    minSpan: v.drift_min_span,
  };
}
