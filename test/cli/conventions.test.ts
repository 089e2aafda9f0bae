/**
 * Command-line conventions a shell user expects: short options for the common ones, ASCII placeholders
 * and a unit or range in the help of every option that takes a quantity, `ratchet help check contacts`,
 * every option documented, and input that cannot be meant (memory: 4, a frame with 0 atoms) refused.
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Command } from 'commander';
import { afterAll, describe, expect, it } from 'vitest';
import { registerCommands } from '../../src/cli/commands.js';
import { register as registerRun } from '../../src/cli/run.js';
import { register as registerCheck } from '../../src/cli/check.js';
import { CampaignError, loadCampaign } from '../../src/campaign/load.js';
import { REPO, cliArgs, makeCampaign, removeCampaigns } from '../engine/fixture.js';
import { inProcess } from './in-process.js';

afterAll(removeCampaigns);

function allCommands(): Command[] {
  const program = new Command().name('ratchet');
  registerCommands(program);
  const out: Command[] = [];
  const walk = (c: Command) => {
    for (const s of c.commands) {
      out.push(s);
      walk(s);
    }
  };
  walk(program);
  return out;
}

describe('options', () => {
  it('short forms: -j, -n, -q, -v on run', async () => {
    const c = makeCampaign();
    const dry = await inProcess(registerRun, ['run', c.file, '-n']);
    expect(dry.code).toBe(0);
    expect(dry.stdout).toContain('dry run: nothing is executed');
    const quiet = await inProcess(registerRun, ['run', c.file, '-j', '1', '-q', '--stop-before', 'r0/train']);
    expect(quiet.code).toBe(0);
    expect(quiet.stdout).not.toMatch(/ \d+\/\d+ ended/);
    expect(quiet.stdout).toContain('r0/label     pass');
    const verbose = await inProcess(registerRun, ['run', c.file, '-v', '--stop-before', 'r0/validate']);
    expect(verbose.code).toBe(0);
    expect(verbose.stdout).toMatch(/r0\/train\/0000 attempt 1: submitted \(local /);
    expect(verbose.stdout).toMatch(/r0\/train\/0001 attempt 1: succeeded \(exit 0\)/);
  }, 120_000);

  it('every placeholder is ASCII, and every option that takes a quantity names its unit or range', () => {
    const quantity = /<(x|value|n|fs|ps|dist|spread|m|k|seconds)>/;
    const unit = /(Å|eV|meV|fs|ps|GPa|bar|K\b|seconds?\b|\bs\b|cpus|a factor|no unit|fraction|0 to 1|whole number|count|frames|lines|threads|tasks|models|atoms|degrees|limit|number)/i;
    for (const cmd of allCommands()) {
      for (const o of cmd.options) {
        expect(o.flags, `${cmd.name()} ${o.flags}`).toMatch(/^[\x20-\x7e]+$/);
        if (quantity.test(o.flags) && !o.hidden) expect(o.description, `ratchet ${cmd.name()} ${o.flags}: "${o.description}"`).toMatch(unit);
      }
    }
  });

  it('every option of every command is in the docs (README or docs/)', () => {
    const docs = [readFileSync(join(REPO, 'README.md'), 'utf8'), ...readdirSync(join(REPO, 'docs')).map((f) => readFileSync(join(REPO, 'docs', f), 'utf8'))].join('\n');
    const missing: string[] = [];
    for (const cmd of allCommands()) {
      for (const o of cmd.options) {
        if (o.hidden || !o.long || o.long === '--help' || o.long === '--json') continue;
        if (!docs.includes(o.long)) missing.push(`ratchet ${cmd.parent?.name() === 'check' ? 'check ' : ''}${cmd.name()} ${o.long}`);
      }
    }
    expect(missing).toEqual([]);
  });

  it('ratchet help check contacts shows the contacts page', () => {
    const r = spawnSync(process.execPath, [...cliArgs(), 'help', 'check', 'contacts'], { cwd: REPO, encoding: 'utf8', timeout: 60_000 });
    expect(r.status).toBe(0);
    expect(r.stdout).toContain('Usage: ratchet check contacts');
    expect(r.stdout).toContain('--hydrogen-scale');
  });
});

describe('input that cannot be meant', () => {
  const root = mkdtempSync(join(tmpdir(), 'ratchet-conventions-'));
  afterAll(() => rmSync(root, { recursive: true, force: true }));

  it('memory: 4 is refused with the likely intent', async () => {
    const c = makeCampaign();
    writeFileSync(c.file, readFileSync(c.file, 'utf8').replace(/(  train:\n)/, '$1    resources:\n      memory: 4\n'));
    const e = (await loadCampaign(c.file).catch((x: unknown) => x)) as CampaignError;
    expect(e).toBeInstanceOf(CampaignError);
    expect(e.keyPath).toBe('stages.train.resources.memory');
    expect(e.detail).toContain('a plain number is MiB: 4 is 4 MiB; write "4G" for 4 GiB');
  });

  it('ratchet check on a frame with 0 atoms or an empty file: exit 2, the file named, nothing on stdout', async () => {
    const zero = join(root, 'zero.xyz');
    writeFileSync(zero, '1\nProperties=species:S:1:pos:R:3\nAr 0 0 0\n0\nProperties=species:S:1:pos:R:3\n');
    const empty = join(root, 'empty.xyz');
    writeFileSync(empty, '\n\n');
    for (const gate of ['contacts', 'drift']) {
      const r = await inProcess(registerCheck, ['check', gate, zero]);
      expect(r.code, r.stderr).toBe(2);
      expect(r.stdout).toBe('');
      expect(r.stderr).toContain(`${zero}: frame 1 has 0 atoms`);
      const e = await inProcess(registerCheck, ['check', gate, empty]);
      expect(e.code).toBe(2);
      expect(e.stdout).toBe('');
      expect(e.stderr).toContain(`${empty}: no frame in the file`);
    }
  });
});
