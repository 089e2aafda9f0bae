/**
 * Shell words for the batch scripts: quoting, environment variable names, scheduler job names.
 * Pure functions; no I/O.
 */

/** A value that cannot be put in a batch script (for example a NUL byte, which no process argument can hold). */
export class ShellValueError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'ShellValueError';
  }
}

/** Characters that need no quoting at all in bash (in any word position). */
const BARE = /^[A-Za-z0-9_@%+=:,./-]+$/;
/** Control characters: written with ANSI-C escapes so a quoted word always stays on one line. */
// eslint-disable-next-line no-control-regex
const CONTROL = /[\x00-\x1f\x7f]/;

/**
 * Quote one value as a single bash word that expands to exactly the value, with nothing evaluated.
 *
 * - Plain values ([A-Za-z0-9_@%+=:,./-]) are returned as they are.
 * - Everything else is single-quoted, with each ' written as '\'' (close, escaped quote, reopen):
 *   inside single quotes bash treats every character literally ($( ), backticks, \, ", ; and non-ASCII).
 * - A value with control characters (newline, tab, carriage return, ...) is written as an ANSI-C
 *   string $'...' with \n, \t, \xHH escapes, so the rendered script stays one line per word. This keeps
 *   a quoted value harmless even inside a comment, and keeps scheduler directive lines intact.
 * - The empty string is ''.
 * A NUL byte cannot be passed to a process at all and is refused.
 */
export function shellQuote(value: string): string {
  if (value.includes('\0')) throw new ShellValueError(`a value contains a NUL byte, which a shell cannot hold: ${JSON.stringify(value)}`);
  if (value === '') return "''";
  if (BARE.test(value)) return value;
  if (!CONTROL.test(value)) return `'${value.replace(/'/g, `'\\''`)}'`;
  let out = "$'";
  for (const ch of value) {
    const c = ch.codePointAt(0)!;
    if (ch === '\\') out += '\\\\';
    else if (ch === "'") out += "\\'";
    else if (ch === '\n') out += '\\n';
    else if (ch === '\t') out += '\\t';
    else if (ch === '\r') out += '\\r';
    else if (c < 0x20 || c === 0x7f) out += `\\x${c.toString(16).padStart(2, '0')}`;
    else out += ch;
  }
  return `${out}'`;
}

const ENV_NAME = /^[A-Za-z_][A-Za-z0-9_]*$/;

/** True when name can be exported by bash (letters, digits, underscore; not starting with a digit). */
export function isEnvName(name: string): boolean {
  return ENV_NAME.test(name);
}

/**
 * Upper-case environment-variable form of an input or output name, for RATCHET_IN_<NAME> and
 * RATCHET_OUT_<NAME>: every run of characters other than A-Z, 0-9 becomes one underscore.
 * E.g. "training-set" -> "TRAINING_SET", "forces.xyz" -> "FORCES_XYZ".
 */
export function toEnvName(name: string): string {
  const upper = name.toUpperCase().replace(/[^A-Z0-9]+/g, '_').replace(/^_+|_+$/g, '');
  if (upper === '') throw new ShellValueError(`cannot make an environment variable name from ${JSON.stringify(name)}: it needs at least one letter or digit`);
  return upper;
}

/**
 * A job name every scheduler accepts: only [A-Za-z0-9_.-], starting with a letter, at most maxLength
 * characters (default 64). Other characters (spaces, '/', quotes, non-ASCII, ...) become '_' and runs of
 * '_' collapse. Common practice across schedulers: PBS requires an alphabetic first character, Grid
 * Engine refuses '/', ':', '@', '\\', '*', '?' and whitespace, and all of them show names in fixed-width
 * columns, so a short plain name is the portable choice.
 */
export function sanitizeJobName(name: string, maxLength = 64): string {
  let s = name.replace(/[^A-Za-z0-9_.-]+/g, '_').replace(/_+/g, '_');
  if (s === '' || s === '_') return 'ratchet';
  if (!/^[A-Za-z]/.test(s)) s = `r${s}`;
  return s.length > maxLength ? s.slice(0, maxLength) : s;
}
