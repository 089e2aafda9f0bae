/**
 * One voice for errors that reach the top of the command line.
 *
 * Input problems are the user's to fix: `ratchet: <file>[:line[:col]]: <what was wrong>; <what to do>`,
 * exit 2. A system error that names a path (a directory given for a file, a missing file, permission
 * denied, a file in the way) is an input problem too, translated here with its path. Anything else is a
 * bug in ratchet: a distinct message, exit 3, and the stack only with RATCHET_DEBUG=1.
 */

import type { Command } from 'commander';

export const EXIT_INPUT = 2;
export const EXIT_INTERNAL = 3;

const SYSTEM: Record<string, [string, string]> = {
  ENOENT: ['no such file or directory', 'check the path'],
  EISDIR: ['is a directory, expected a file', 'give a file'],
  ENOTDIR: ['a part of the path is not a directory', 'check the path'],
  EACCES: ['permission denied', 'check the permissions'],
  EPERM: ['operation not permitted', 'check the permissions'],
  EEXIST: ['already exists', 'choose another path or remove it'],
  ESPIPE: ['is not a regular file (a pipe or terminal cannot be read by position)', 'save it to a file first'],
  ENOSPC: ['no space left on the device', 'free some space'],
  EROFS: ['is on a read-only file system', 'choose a writable place'],
  ENAMETOOLONG: ['the path is too long', 'shorten it'],
  ELOOP: ['too many symbolic links', 'check the path'],
  EMFILE: ['too many open files', 'raise the limit (ulimit -n) or check fewer files at once'],
};

/** The words for a system error with a path, or undefined when it is not one. */
export function systemErrorMessage(err: unknown): string | undefined {
  const e = err as NodeJS.ErrnoException | undefined;
  if (!e || typeof e !== 'object' || typeof e.code !== 'string') return undefined;
  const known = SYSTEM[e.code];
  if (!known) return undefined;
  const path = e.path ?? (e as { dest?: string }).dest;
  return path ? `${path}: ${known[0]}; ${known[1]}` : `${known[0]} (${e.syscall ?? 'system call'}); ${known[1]}`;
}

/** Report an error that reached the top and set the exit code: input (2) or internal (3). */
export function reportTopLevel(err: unknown, write: (s: string) => void = (s) => process.stderr.write(s)): number {
  const sys = systemErrorMessage(err);
  if (sys) {
    write(`ratchet: ${sys}\n`);
    return EXIT_INPUT;
  }
  const message = err instanceof Error ? err.message : String(err);
  write(`ratchet: internal error: ${message}\n`);
  if (process.env.RATCHET_DEBUG && err instanceof Error && err.stack) write(`${err.stack}\n`);
  else write(`ratchet: this is a bug in ratchet, not a problem with your input; run again with RATCHET_DEBUG=1 to see where it happened, and report it\n`);
  return EXIT_INTERNAL;
}

/**
 * The program's own usage errors in the same voice: commander writes "error: ..."; ratchet writes
 * "ratchet: ...". Set on the program before its subcommands are added (they inherit it).
 */
export function oneVoice(program: Command): Command {
  return program.configureOutput({ writeErr: (s) => process.stderr.write(s.replace(/^error: /, 'ratchet: ')) });
}
