/**
 * THE SEAM between the engine and frame selection.
 *
 * The sample stage of every round calls `samplePolicy` once, in process, with where to read from
 * and where to write the chosen frames. The engine only records what the policy returns; the policy
 * knows nothing of the ledger, the backend or task directories.
 *
 * The policy itself (round-0 perturbations; later rounds: committee bands, contacts, farthest-point
 * selection) lives in src/select/policy.ts; this file holds the types and the one assignment.
 */
import { committeeSamplePolicy } from '../select/policy.js';

export interface SampleSource {
  /** Absolute path of an extended XYZ file. */
  path: string;
  /** Its artifact id ("sha256:..."). */
  artifact: string;
  /** The exploration condition that produced it (trajectories), absent for starting structures. */
  condition?: string;
}

export interface SampleRequest {
  round: number;
  /** Seed for any random choice (derived from the campaign seed and the round). */
  seed: number;
  /** 'start' in round 0 (the campaign's starting structures), 'trajectories' later (one per condition). */
  kind: 'start' | 'trajectories';
  sources: SampleSource[];
  /** The campaign's sample section parameters. */
  params: Record<string, unknown>;
  /** The committee size M (trajectories carry forces_0 .. forces_{M-1}). */
  committee: number;
  /** Absolute path to write the selected frames to (extended XYZ). Written once, completely. */
  output: string;
}

export interface SampleOutcome {
  /** Frames written to `output`. */
  frames: number;
  /** Per condition: frames looked at, and how they fell (when the policy knows). */
  conditions?: Record<string, { frames: number; selected: number; confident?: number; informative?: number; runaway?: number }>;
  /** Anything else worth keeping with the stage's verdict. */
  figures?: Record<string, unknown>;
  /** Plain-words notes (e.g. "condition 120K: no informative frames"). */
  notes?: string[];
}

export type SamplePolicy = (req: SampleRequest) => Promise<SampleOutcome>;

/** The policy the sample stage uses: committee bands, contacts and farthest-point selection (src/select/policy.ts). */
export const samplePolicy: SamplePolicy = committeeSamplePolicy;
