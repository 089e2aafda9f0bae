/** Usage errors are bad input (exit 2, message on stderr); help and version exit 0. */
import { spawnSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import { REPO, cliArgs } from '../engine/fixture.js';

const ratchet = (args: string[]) => spawnSync(process.execPath, [...cliArgs(), ...args], { cwd: REPO, encoding: 'utf8', timeout: 60_000 });

describe('command-line usage errors', () => {
  it('exits 2 for an unknown option, a missing argument and an unknown command', () => {
    const cases: [string[], string][] = [
      [['run', 'c.yaml', '--bogus'], "error: unknown option '--bogus'"],
      [['status'], "error: missing required argument 'campaign'"],
      [['frobnicate'], "error: unknown command 'frobnicate'"],
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
