/**
 * THE SEAM between the engine and frame selection.
 *
 * The sample stage of every round calls `samplePolicy` once, in process, with where to read from
 * and where to write the chosen frames. The engine only records what the policy returns; the policy
 * knows nothing of the ledger, the backend or task directories.
 *
 * `placeholderSamplePolicy` below is a STAND-IN so the engine can run end to end: round 0 takes the
 * starting structures as they are, later rounds take every k-th frame of each trajectory. It does no
 * committee-based selection. The real policy (committee bands, contacts, farthest-point selection,
 * round-0 perturbations) lives in src/select/ and replaces it by changing the one assignment of
 * `samplePolicy` at the bottom of this file.
 */
import { readFrames } from '../atoms/xyz/reader.js';
import { writeFrames } from '../atoms/xyz/writer.js';
import { basename } from 'node:path';
import type { Frame } from '../atoms/frame.js';

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

/**
 * PLACEHOLDER policy (see the file comment): round 0 = every starting frame; later rounds = every
 * k-th frame of each trajectory (k = params.every, default 10), starting from frame k-1, at most
 * params.max_frames per trajectory (default unlimited). Selected frames carry `source_artifact`
 * and `source_frame` info keys so lineage reaches single frames.
 */
export const placeholderSamplePolicy: SamplePolicy = async (req) => {
  const every = positiveInt(req.params.every, 10);
  const cap = positiveInt(req.params.max_frames, Number.POSITIVE_INFINITY);
  const conditions: NonNullable<SampleOutcome['conditions']> = {};
  let written = 0;
  async function* frames(): AsyncGenerator<Frame> {
    for (const src of req.sources) {
      let index = 0;
      let selected = 0;
      for await (const f of readFrames(src.path)) {
        const take = req.kind === 'start' || ((index + 1) % every === 0 && selected < cap);
        if (take) {
          f.info.set('source_artifact', src.artifact);
          f.info.set('source_frame', index);
          selected++;
          written++;
          yield f;
        }
        index++;
      }
      conditions[src.condition ?? basename(src.path)] = { frames: index, selected };
    }
  }
  await writeFrames(req.output, frames());
  return { frames: written, conditions, notes: ['placeholder sample policy: no committee-based selection'] };
};

function positiveInt(v: unknown, dflt: number): number {
  return typeof v === 'number' && Number.isInteger(v) && v > 0 ? v : dflt;
}

/** The policy the sample stage uses. Issue 4 (src/select/) replaces this assignment. */
export const samplePolicy: SamplePolicy = placeholderSamplePolicy;
