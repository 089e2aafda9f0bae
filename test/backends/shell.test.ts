import { execFileSync } from 'node:child_process';
import { readdirSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { afterAll, describe, expect, it } from 'vitest';
import { isEnvName, sanitizeJobName, shellQuote, ShellValueError, toEnvName } from '../../src/backends/shell.js';
import { HOSTILE } from './corpus.js';
import { removeTempDirs, tempDir } from './helpers.js';

afterAll(removeTempDirs);

/** What bash makes of a list of words: runs `printf '%s\0' WORD...` and splits the output on NUL. */
function bashWords(words: string[], cwd: string): string[] {
  const out = execFileSync('bash', ['-c', `printf '%s\\0' ${words.join(' ')}`], { cwd, encoding: 'utf8' });
  return out.split('\0').slice(0, -1);
}

describe('shellQuote', () => {
  // Reference: GNU bash itself (the shell that runs the scripts) parses each quoted word back to the
  // original value. Quoting rules: GNU Bash Reference Manual, 3.1.2.2 Single Quotes, 3.1.2.4 ANSI-C Quoting.
  it('round-trips every hostile value through bash unchanged, evaluating nothing', () => {
    const cwd = tempDir('ratchet-quote-');
    expect(bashWords(HOSTILE.map(shellQuote), cwd)).toEqual(HOSTILE);
    expect(readdirSync(cwd)).toEqual([]); // no $(touch ...) or `touch ...` ran
  });

  it('round-trips every single byte value 1..255 (as UTF-8 text) and the empty string', () => {
    const values = [''];
    for (let c = 1; c < 256; c++) values.push(`a${String.fromCharCode(c)}b`, String.fromCharCode(c));
    expect(bashWords(values.map(shellQuote), tmpdir())).toEqual(values);
  });

  // Independent second parser: Python's shlex in POSIX mode (standard library) reads the single-quoted
  // form back to the value (it does not know $'...', so only values without control characters).
  it('agrees with Python shlex (POSIX mode) on values without control characters', () => {
    const values = HOSTILE.filter((v) => !/[\x00-\x1f\x7f]/.test(v));
    const script = 'import json,shlex,sys\nprint(json.dumps([shlex.split(w) for w in json.load(sys.stdin)]))';
    const out = execFileSync('/usr/bin/python3', ['-c', script], { input: JSON.stringify(values.map(shellQuote)), encoding: 'utf8' });
    expect(JSON.parse(out)).toEqual(values.map((v) => [v]));
  });

  it('always yields one line, so a quoted value cannot end a comment or a directive line', () => {
    for (const v of HOSTILE) expect(shellQuote(v)).not.toMatch(/[\n\r]/);
  });

  it('leaves plain words bare and quotes the empty string', () => {
    expect(shellQuote('/abs/path/file-1.xyz')).toBe('/abs/path/file-1.xyz');
    expect(shellQuote('')).toBe("''");
    expect(shellQuote("it's")).toBe("'it'\\''s'");
    expect(shellQuote('a\nb')).toBe("$'a\\nb'");
  });

  it('refuses a NUL byte with a clear error', () => {
    expect(() => shellQuote('a\0b')).toThrow(ShellValueError);
    expect(() => shellQuote('a\0b')).toThrow(/NUL byte/);
  });
});

describe('environment variable names', () => {
  it('accepts what bash can export and refuses the rest', () => {
    // POSIX.1-2017 XBD 3.235 "Name": letters, digits, underscores, not starting with a digit.
    for (const ok of ['A', '_x', 'RATCHET_IN_FRAMES', 'a1']) expect(isEnvName(ok)).toBe(true);
    for (const bad of ['', '1A', 'A-B', 'A B', 'A=B', 'Ä', '$A']) expect(isEnvName(bad)).toBe(false);
  });

  it('maps input/output names to upper-case env names', () => {
    expect(toEnvName('training-set')).toBe('TRAINING_SET');
    expect(toEnvName('forces.xyz')).toBe('FORCES_XYZ');
    expect(toEnvName('frames')).toBe('FRAMES');
    expect(() => toEnvName('--')).toThrow(/at least one letter or digit/);
  });
});

describe('sanitizeJobName', () => {
  it('keeps [A-Za-z0-9_.-], starts with a letter, and caps the length', () => {
    expect(sanitizeJobName('argon r0/label/0003')).toBe('argon_r0_label_0003');
    expect(sanitizeJobName('0003')).toBe('r0003');
    expect(sanitizeJobName("it's $(x)\n`y`")).toBe('it_s_x_y_');
    expect(sanitizeJobName('')).toBe('ratchet');
    expect(sanitizeJobName('ü日本')).toBe('ratchet');
    expect(sanitizeJobName('a'.repeat(200)).length).toBe(64);
    expect(sanitizeJobName('abcdefghijklmnopq', 15)).toBe('abcdefghijklmno');
    for (const v of HOSTILE) expect(sanitizeJobName(v)).toMatch(/^[A-Za-z][A-Za-z0-9_.-]{0,63}$/);
  });
});
