/**
 * Running a gate for the command line: print the readable text or one JSON object, and map the outcome to an exit
 * code (0 pass or warn, 1 fail, 2 input the gate cannot judge).
 */
import { formatResult, resultJson } from './format.js';
import type { GateResult } from './types.js';
import { systemErrorMessage } from '../cli/errors.js';

export interface Output {
  stdout: (text: string) => void;
  stderr: (text: string) => void;
}

const processOutput: Output = {
  stdout: (t) => process.stdout.write(t),
  stderr: (t) => process.stderr.write(t),
};

/** The message for an error thrown while checking: errno errors name the file; everything else keeps its message. */
export function inputErrorMessage(err: unknown): string {
  const sys = systemErrorMessage(err);
  if (sys) return sys;
  return err instanceof Error ? err.message : String(err);
}

/** Run one check and report it; returns the exit code. */
export async function reportCheck(
  gate: string,
  work: () => Promise<GateResult<object>>,
  options: { json?: boolean },
  out: Output = processOutput,
): Promise<number> {
  let result: GateResult<object>;
  try {
    result = await work();
  } catch (err) {
    out.stderr(`ratchet: check ${gate}: ${inputErrorMessage(err)}\n`);
    if (process.env.RATCHET_DEBUG && err instanceof Error && err.stack) out.stderr(err.stack + '\n');
    return 2;
  }
  // A file without frames is bad input, not a verdict (exit 2, nothing on stdout).
  const frames = (result.figures as { frames?: unknown }).frames;
  if (frames === 0) {
    out.stderr(`ratchet: check ${gate}: found no frame to judge in the input (an empty file, or only blank lines); give extended XYZ with at least one frame\n`);
    return 2;
  }
  out.stdout(options.json ? JSON.stringify(resultJson(result)) + '\n' : formatResult(result));
  return result.verdict === 'fail' ? 1 : 0;
}
