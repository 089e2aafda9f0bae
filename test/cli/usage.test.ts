/** Usage errors are bad input (exit 2, message on stderr); help and version exit 0. */
import { spawnSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import { REPO, cliArgs } from '../engine/fixture.js';

const ratchet = (args: string[]) => spawnSync(process.execPath, [...cliArgs(), ...args], { cwd: REPO, encoding: 'utf8', timeout: 60_000 });

describe('command-line usage errors', () => {
  it('exits 2 for an unknown option, a missing argument and an unknown command', () => {
    const cases: [string[], string][] = [
      [['run', 'c.yaml', '--bogus'], "ratchet: unknown option '--bogus'"],
      [['status'], "ratchet: missing required argument 'campaign'"],
      [['frobnicate'], "ratchet: unknown command 'frobnicate'"],
    ];
    for (const [args, message] of cases) {
      const r = ratchet(args);
      expect(r.status).toBe(2);
      expect(r.stderr).toContain(message);
    }
  });

  it('exits 0 for --version and prints the package version', () => {
    const r = ratchet(['--version']);
    expect(r.status).toBe(0);
    expect(r.stdout.trim()).toMatch(/^\d+\.\d+\.\d+$/);
  });
});

describe('one voice for errors that reach the top', () => {
  it('translates a system error with its path (input, exit 2) and reports anything else as a bug (exit 3)', async () => {
    const { reportTopLevel, systemErrorMessage } = await import('../../src/cli/errors.js');
    const lines: string[] = [];
    const eisdir = Object.assign(new Error('EISDIR: illegal operation on a directory, read'), { code: 'EISDIR', path: '/tmp/some-dir', syscall: 'read' });
    expect(systemErrorMessage(eisdir)).toBe('/tmp/some-dir: is a directory, expected a file; give a file');
    expect(reportTopLevel(eisdir, (s) => lines.push(s))).toBe(2);
    expect(lines.join('')).toBe('ratchet: /tmp/some-dir: is a directory, expected a file; give a file\n');
    lines.length = 0;
    const saved = process.env.RATCHET_DEBUG;
    delete process.env.RATCHET_DEBUG;
    try {
      expect(reportTopLevel(new TypeError("Cannot read properties of undefined (reading 'x')"), (s) => lines.push(s))).toBe(3);
    } finally {
      if (saved !== undefined) process.env.RATCHET_DEBUG = saved;
    }
    expect(lines[0]).toBe("ratchet: internal error: Cannot read properties of undefined (reading 'x')\n");
    expect(lines[1]).toContain('RATCHET_DEBUG=1');
  });

  it('a directory given to ratchet check: exit 2, the path named, nothing on stdout', () => {
    const r = ratchet(['check', 'contacts', REPO]);
    expect(r.status).toBe(2);
    expect(r.stdout).toBe('');
    expect(r.stderr).toMatch(/^ratchet: check contacts: .*: is a directory, expected a file; give a file\n$/);
  });
});
