/**
 * Run ratchet's command line in this process (no node start-up per call): a fresh commander program in
 * the program's own voice (src/cli/errors.ts), stdout and stderr captured, process.exit turned into a
 * thrown value. `register` adds the commands under test (one command module's register, or all of them).
 */
import { Command } from 'commander';
import { vi } from 'vitest';
import { oneVoice } from '../../src/cli/errors.js';

class Exit extends Error {
  constructor(readonly code: number) {
    super(`exit ${code}`);
  }
}

export interface CliResult {
  code: number;
  stdout: string;
  stderr: string;
}

export async function inProcess(register: (program: Command) => void, args: string[]): Promise<CliResult> {
  let stdout = '';
  let stderr = '';
  const out = vi.spyOn(process.stdout, 'write').mockImplementation((c: string | Uint8Array) => ((stdout += String(c)), true));
  const err = vi.spyOn(process.stderr, 'write').mockImplementation((c: string | Uint8Array) => ((stderr += String(c)), true));
  const exit = vi.spyOn(process, 'exit').mockImplementation((c?: string | number | null) => {
    throw new Exit(Number(c ?? 0));
  });
  process.exitCode = undefined;
  let code: number;
  try {
    const program = oneVoice(new Command().name('ratchet')).exitOverride((e) => process.exit(e.exitCode === 0 ? 0 : 2));
    register(program);
    await program.parseAsync(['node', 'ratchet', ...args]);
    code = Number(process.exitCode ?? 0);
  } catch (e) {
    if (!(e instanceof Exit)) throw e;
    code = e.code;
  } finally {
    out.mockRestore();
    err.mockRestore();
    exit.mockRestore();
    process.exitCode = undefined;
  }
  return { code, stdout, stderr };
}
