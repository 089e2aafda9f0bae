/**
 * Running a gate for the command line: print the readable text or one JSON object, and map the outcome to an exit
 * code (0 pass or warn, 1 fail, 2 input the gate cannot judge).
 */
import { formatResult, resultJson } from './format.js';
import type { GateResult } from './types.js';

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
  const e = err as NodeJS.ErrnoException;
  if (e && typeof e === 'object' && typeof e.code === 'string' && typeof e.path === 'string') {
    const what = e.code === 'ENOENT' ? 'no such file' : e.code === 'EISDIR' ? 'is a directory, expected a file' : e.code === 'EACCES' ? 'permission denied' : e.code;
    return `${e.path}: cannot read the file (${what})`;
  }
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
    out.stderr(`ratchet check ${gate}: ${inputErrorMessage(err)}\n`);
    if (process.env.RATCHET_DEBUG && err instanceof Error && err.stack) out.stderr(err.stack + '\n');
    return 2;
  }
  out.stdout(options.json ? JSON.stringify(resultJson(result)) + '\n' : formatResult(result));
  return result.verdict === 'fail' ? 1 : 0;
}
