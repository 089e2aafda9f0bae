/**
 * Every malformed input of the generated corpus (test/corpus/generate.ts) is refused up front in one voice:
 * exit 2, a message naming the file and the line or key (the frame or line for a structure file), no
 * stack trace, and nothing changed: an existing ledger keeps its bytes, no task folder or plan appears.
 * `ratchet schema` and `ratchet run --dry-run` give the same verdict, first line for first line, on every
 * campaign. Commands run in-process (commander with the command registered, as the CLI wires it) or
 * through runCampaign, so the corpus stays fast; a few items also go through the real CLI.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { spawnSync } from 'node:child_process';
import { tmpdir } from 'node:os';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { CampaignError, loadCampaign } from '../../src/campaign/load.js';
import { inProcess } from '../cli/in-process.js';
import { register as registerSchema } from '../../src/cli/schema.js';
import { register as registerCheck } from '../../src/cli/check.js';
import { BufferOutput } from '../../src/engine/output.js';
import { runCampaign } from '../../src/engine/run.js';
import { campaignCorpus, xyzCorpus, type CampaignItem } from './generate.js';

const ROOT = fileURLToPath(new URL('../../', import.meta.url));
let root: string;
beforeAll(() => {
  root = mkdtempSync(join(tmpdir(), 'ratchet-corpus-'));
});
afterAll(() => rmSync(root, { recursive: true, force: true }));


const STACK = /\n\s+at .+\(?.*:\d+:\d+\)?/;
const LEDGER_LINE = (file: string) => JSON.stringify({ seq: 1, at: '2026-01-01T00:00:00.000Z', type: 'campaign_identity', name: 'engine test', file: 'campaign.yaml', path: file }) + '\n';

/** Write an item's folder with an existing ledger (as a campaign that ran once would have). */
function materialise(item: CampaignItem, n: number): { dir: string; file: string; ledger: string; before: Buffer } {
  const dir = join(root, `c${String(n).padStart(3, '0')}`);
  mkdirSync(join(dir, '.ratchet'), { recursive: true });
  for (const [f, t] of Object.entries(item.files)) {
    mkdirSync(dirname(join(dir, f)), { recursive: true });
    writeFileSync(join(dir, f), t);
  }
  const file = join(dir, 'campaign.yaml');
  const ledger = join(dir, '.ratchet', 'ledger.jsonl');
  writeFileSync(ledger, LEDGER_LINE(file));
  return { dir, file, ledger, before: readFileSync(ledger) };
}

const firstLine = (s: string) => s.split('\n')[0]!;

const campaigns = campaignCorpus();
const xyzs = xyzCorpus();

describe('the corpus', () => {
  it('holds at least 150 malformed inputs of every kind', () => {
    expect(campaigns.length + xyzs.length).toBeGreaterThanOrEqual(150);
    for (const kind of ['unknown key', 'wrong type', 'YAML broken', 'required key', 'missing', 'starting structure:', 'template:', 'command']) {
      expect(campaigns.some((c) => c.name.includes(kind)), kind).toBe(true);
    }
    expect(new Set([...campaigns, ...xyzs].map((i) => i.name)).size).toBe(campaigns.length + xyzs.length);
  });
});

describe('malformed campaigns: schema and run --dry-run refuse alike, nothing changes', () => {
  campaigns.forEach((item, n) => {
    it(item.name, async () => {
      const { dir, file, ledger, before } = materialise(item, n);
      const named = join(dir, item.file ?? 'campaign.yaml');

      // The loader (what `schema` and every run use): one CampaignError with file and line or key.
      const e = await loadCampaign(file).then(
        () => null,
        (x: unknown) => x,
      );
      expect(e, 'the loader accepted it').toBeInstanceOf(CampaignError);
      const ce = e as CampaignError;
      const p = ce.problems[0]!;
      expect([file, named]).toContain(p.file);
      expect(p.line !== undefined || p.keyPath !== '', `${ce.message}: neither a line nor a key`).toBe(true);
      if (item.key) expect(ce.problems.map((q) => q.keyPath).some((k) => k.startsWith(item.key!)), `${ce.message}: expected the key ${item.key}`).toBe(true);

      const schema = await inProcess(registerSchema, ['schema', file]);
      expect(schema.code).toBe(2);
      expect(schema.stdout).toBe('');
      expect(schema.stderr).toContain(p.file);
      expect(schema.stderr).toMatch(/^ratchet: /);
      expect(schema.stderr).not.toMatch(STACK);

      for (const dryRun of [true, false]) {
        const errors: string[] = [];
        const r = await runCampaign({ campaign: file, dryRun, out: new BufferOutput(), error: (m) => errors.push(m) });
        expect(r.exitCode).toBe(2);
        const said = errors.join('\n');
        expect(said).not.toMatch(STACK);
        // runCampaign prefixes "ratchet: " when it writes to stderr itself (src/engine/run.ts); here it hands the bare message over.
        expect(`ratchet: ${firstLine(said)}`).toBe(firstLine(schema.stderr));
      }
      expect(readFileSync(ledger).equals(before), 'the ledger changed').toBe(true);
      expect(existsSync(join(dir, 'rounds'))).toBe(false);
      expect(existsSync(join(dir, '.ratchet', 'plan'))).toBe(false);
      expect(existsSync(join(dir, '.ratchet', 'lock'))).toBe(false);
    });
  });
});

describe('malformed extended XYZ given to ratchet check: exit 2, file and frame or line named', () => {
  xyzs.forEach((item, n) => {
    it(item.name, async () => {
      const path = join(root, `x${String(n).padStart(3, '0')}.xyz`);
      writeFileSync(path, item.text);
      const r = await inProcess(registerCheck, ['check', 'contacts', path]);
      expect(r.code, r.stdout + r.stderr).toBe(2);
      expect(r.stdout).toBe('');
      if (/empty XYZ file|blank lines only/.test(item.name)) {
        // No frame at all: no line to point at; the file is named.
        expect(r.stderr).toContain(`${path}: no frame in the file (it is empty or holds only blank lines)`);
      } else {
        expect(r.stderr).toContain(path);
        expect(r.stderr).toMatch(new RegExp(`${path.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')}:\\d+: `));
      }
      expect(r.stderr).toMatch(/^ratchet: /);
      expect(r.stderr).not.toMatch(STACK);
    });
  });
});

describe('a few through the real CLI', () => {
  const cli = (args: string[]) => {
    const r = spawnSync(process.execPath, ['--import', join(ROOT, 'node_modules/tsx/dist/esm/index.mjs'), join(ROOT, 'src/cli/index.ts'), ...args], { encoding: 'utf8', timeout: 120_000 });
    return { code: r.status, stdout: r.stdout, stderr: r.stderr };
  };
  const pick = ['unknown key holdout_x', 'starting structure: a NaN position', 'template: a misspelt placeholder'];
  for (const name of pick) {
    it(name, () => {
      const n = campaigns.findIndex((c) => c.name === name);
      expect(n, `no corpus item named ${name}`).toBeGreaterThanOrEqual(0);
      const { dir, file, ledger, before } = materialise(campaigns[n]!, 900 + n);
      const schema = cli(['schema', file]);
      const dry = cli(['run', file, '--dry-run']);
      expect(schema.code).toBe(2);
      expect(dry.code).toBe(2);
      expect(firstLine(dry.stderr)).toBe(firstLine(schema.stderr));
      expect(dry.stderr + schema.stderr).not.toMatch(STACK);
      expect(readFileSync(ledger).equals(before)).toBe(true);
      expect(existsSync(join(dir, 'rounds'))).toBe(false);
    });
  }
  it('an extended XYZ file with a word for a coordinate', () => {
    const path = join(root, 'cli.xyz');
    writeFileSync(path, xyzs.find((x) => x.name === 'frame 1: a coordinate that is a word')!.text);
    const r = cli(['check', 'contacts', path]);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/^ratchet: check contacts: /);
    expect(r.stderr).toContain(`${path}:8: atom 1 of frame 1, column 3`);
  });
});
