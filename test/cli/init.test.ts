/**
 * `ratchet init DIR` through the real CLI: writes a starter campaign that loads, and refuses (exit 2,
 * nothing changed) to overwrite an existing one.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { loadCampaign } from '../../src/campaign/load.js';
import { STARTER_CAMPAIGN } from '../../src/campaign/starter.js';

const ROOT = fileURLToPath(new URL('../../', import.meta.url));

function cli(args: string[], cwd: string): { code: number | null; stdout: string; stderr: string } {
  const r = spawnSync(process.execPath, ['--import', join(ROOT, 'node_modules/tsx/dist/esm/index.mjs'), join(ROOT, 'src/cli/index.ts'), ...args], {
    cwd,
    encoding: 'utf8',
  });
  return { code: r.status, stdout: r.stdout, stderr: r.stderr };
}

let dir: string;
beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'ratchet-cli-init-'));
});
afterAll(() => {
  rmSync(dir, { recursive: true, force: true });
});

describe('ratchet init', () => {
  it('writes campaign.yaml and start.xyz that load as written', async () => {
    const r = cli(['init', 'proj'], dir);
    expect(r.code).toBe(0);
    expect(r.stderr).toBe('');
    expect(r.stdout).toBe(
      'wrote proj/campaign.yaml\nwrote proj/start.xyz\n' +
        'next: edit the lines marked "edit" (species, start, commands, resources), then\n' +
        '  ratchet schema proj/campaign.yaml     # check it\n' +
        '  ratchet run proj/campaign.yaml --dry-run\n',
    );
    expect(readFileSync(join(dir, 'proj', 'campaign.yaml'), 'utf8')).toBe(STARTER_CAMPAIGN);
    const loaded = await loadCampaign(join(dir, 'proj', 'campaign.yaml'));
    expect(loaded.campaign.name).toBe('silicon-starter');
  });

  it('refuses to overwrite an existing campaign: exit 2, files unchanged', () => {
    const before = readFileSync(join(dir, 'proj', 'campaign.yaml'), 'utf8');
    const r = cli(['init', 'proj'], dir);
    expect(r.code).toBe(2);
    expect(r.stdout).toBe('');
    expect(r.stderr).toBe(
      `ratchet: ${join(dir, 'proj', 'campaign.yaml')}: already exists; not overwriting it (choose another directory or move the file)\n`,
    );
    expect(readFileSync(join(dir, 'proj', 'campaign.yaml'), 'utf8')).toBe(before);
  });
});

describe('ratchet init: a target it cannot create is refused at once', () => {
  // Each of these once printed a raw system error or, for /proc, never returned (a recursive mkdir
  // under /proc retries forever); spawnSync's timeout turns a hang into a failure here.
  const run = (target: string) => {
    const r = spawnSync(process.execPath, ['--import', join(ROOT, 'node_modules/tsx/dist/esm/index.mjs'), join(ROOT, 'src/cli/index.ts'), 'init', target], {
      cwd: dir,
      encoding: 'utf8',
      timeout: 60_000,
    });
    return { code: r.status, stdout: r.stdout, stderr: r.stderr };
  };

  it('an existing file as the target', () => {
    writeFileSync(join(dir, 'a-file'), 'x');
    const r = run('a-file');
    expect(r.code).toBe(2);
    expect(r.stdout).toBe('');
    expect(r.stderr).toBe(`ratchet: ${join(dir, 'a-file')}: already exists and is not a directory; give a directory (init writes campaign.yaml and start.xyz into it)\n`);
    expect(readFileSync(join(dir, 'a-file'), 'utf8')).toBe('x');
  });

  it('a path below a file', () => {
    const r = run('a-file/sub/dir');
    expect(r.code).toBe(2);
    expect(r.stderr).toBe(`ratchet: ${join(dir, 'a-file')}: is not a directory, so ${join(dir, 'a-file/sub/dir')} cannot be created; check the path\n`);
  });

  it.each(['/proc/x', '/sys/x/y'])('%s (a kernel file system)', (target) => {
    const r = run(target);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(new RegExp(`^ratchet: ${target}: is under /(proc|sys), a kernel file system that cannot hold a campaign; choose a directory on a disk\\n$`));
    expect(existsSync(target)).toBe(false);
  });

  it('--example into /proc/x', () => {
    const r = spawnSync(process.execPath, ['--import', join(ROOT, 'node_modules/tsx/dist/esm/index.mjs'), join(ROOT, 'src/cli/index.ts'), 'init', '--example', 'water-xtb', '/proc/x'], {
      cwd: dir,
      encoding: 'utf8',
      timeout: 60_000,
    });
    expect(r.status).toBe(2);
    expect(r.stderr).toBe('ratchet: /proc/x: is under /proc, a kernel file system that cannot hold a campaign; choose a directory on a disk\n');
  });

  // Permission bits do not bind root, so this one runs only for an ordinary user.
  it.skipIf(process.getuid?.() === 0)('a directory without write permission', () => {
    const locked = join(dir, 'locked');
    mkdirSync(locked, { mode: 0o555 });
    const r = run('locked/proj');
    expect(r.code).toBe(2);
    expect(r.stderr).toBe(`ratchet: ${locked}: cannot write here (permission denied); choose a writable directory\n`);
    expect(existsSync(join(locked, 'proj'))).toBe(false);
  });
});
