/**
 * Shared shapes of every gate: a verdict with plain-word reasons and the gate's figures.
 */

export type Verdict = 'pass' | 'warn' | 'fail';

export interface GateResult<F = Record<string, unknown>> {
  /** 'contacts', 'drift', 'errors' or 'committee'. */
  gate: string;
  verdict: Verdict;
  /** Why the verdict is what it is, in plain words (empty or a single line for a clean pass). */
  reasons: string[];
  /** The gate's numbers; the keys are the JSON keys of `ratchet check <gate> --json`. */
  figures: F;
}

/** One input file of a multi-file check: frames are numbered across files in order. */
export interface FileSpan {
  path: string;
  /** Global index of this file's first frame. */
  first_frame: number;
  frames: number;
}

/**
 * Input that the gate cannot judge (missing key, mismatched frames, unknown element...).
 * The CLI turns it into exit code 2; the message names the file, the frame or line, and what was expected.
 */
export class GateInputError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'GateInputError';
  }
}
