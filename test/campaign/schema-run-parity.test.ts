/**
 * `ratchet schema` applies every rule `ratchet run` applies: each malformed campaign below is refused by
 * the campaign loader (what schema runs) with its file, line and key, and by a dry run, with exit 2 and
 * nothing written to the ledger.
 */
import { existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { CampaignError, loadCampaign } from '../../src/campaign/load.js';
import { BUILTIN_TEMPLATES_DIR } from '../../src/backends/templates.js';
import { BufferOutput } from '../../src/engine/output.js';
import { runCampaign } from '../../src/engine/run.js';
import { campaignYaml, startXyz } from '../engine/fixture.js';

const root = mkdtempSync(join(tmpdir(), 'ratchet-parity-'));
afterAll(() => rmSync(root, { recursive: true, force: true }));

const builtin = (name: string) => readFileSync(join(BUILTIN_TEMPLATES_DIR, name), 'utf8');

interface Case {
  name: string;
  yaml?: (y: string) => string;
  templates?: Record<string, string | Buffer>;
  key: string;
  detail: RegExp;
}

const withTemplates = (y: string) => y.replace('backend:\n  kind: local\n', 'backend:\n  kind: local\n  template_dir: tpl\n');

const cases: Case[] = [
  { name: 'a misspelt placeholder', yaml: withTemplates, templates: { 'common.sh': builtin('common.sh').replace('{{task_dir}}', '{{task_dri}}') }, key: 'backend.template_dir', detail: /unknown placeholder \{\{task_dri\}\}/ },
  { name: 'an unclosed placeholder', yaml: withTemplates, templates: { 'common.sh': builtin('common.sh') + '\necho {{task_dir\n' }, key: 'backend.template_dir', detail: /malformed placeholder/ },
  { name: 'a header without #!', yaml: withTemplates, templates: { 'local.sh': builtin('local.sh').replace(/^#![^\n]*\n/, '') }, key: 'backend.template_dir', detail: /must start with a #! line/ },
  { name: 'a body without {{command}}', yaml: withTemplates, templates: { 'common.sh': builtin('common.sh').replaceAll('{{command}}', 'true') }, key: 'backend.template_dir', detail: /must use \{\{command\}\}/ },
  { name: 'a binary template file', yaml: withTemplates, templates: { 'common.sh': Buffer.from([0x23, 0x21, 0xff, 0xfe, 0x00, 0x01]) }, key: 'backend.template_dir', detail: /binary data/ },
  { name: 'a blank command', yaml: (y) => y.replace(/(  train:\n    command: )"[^"]*"/, '$1"   "'), key: 'stages.train.command', detail: /found only blanks/ },
  { name: 'a command with a NUL byte', yaml: (y) => y.replace(/(  train:\n    command: )"([^"]*)"/, '$1"$2\\0"'), key: 'stages.train.command', detail: /NUL/ },
  { name: 'a set-up line with a NUL byte', yaml: (y) => y.replace(/(  train:\n)/, '$1    setup: ["module load x\\0"]\n'), key: 'stages.train.setup', detail: /NUL/ },
];

describe('schema and a dry run agree on malformed campaigns', () => {
  for (const c of cases) {
    it(c.name, async () => {
      const dir = mkdtempSync(join(root, 'c-'));
      writeFileSync(join(dir, 'start.xyz'), startXyz());
      const file = join(dir, 'campaign.yaml');
      writeFileSync(file, (c.yaml ?? ((y) => y))(campaignYaml()));
      if (c.templates) {
        mkdirSync(join(dir, 'tpl'));
        for (const [n, t] of Object.entries(c.templates)) writeFileSync(join(dir, 'tpl', n), t);
      }
      const err = await loadCampaign(file).then(
        () => null,
        (e: unknown) => e,
      );
      expect(err).toBeInstanceOf(CampaignError);
      const e = err as CampaignError;
      expect(e.file).toBe(file);
      expect(e.keyPath).toBe(c.key);
      expect(e.line).toBeGreaterThan(1);
      expect(e.detail).toMatch(c.detail);
      const errors: string[] = [];
      const r = await runCampaign({ campaign: file, dryRun: true, out: new BufferOutput(), error: (m) => errors.push(m) });
      expect(r.exitCode).toBe(2);
      expect(errors.join('\n')).toContain(`${file}:${e.line}:`);
      expect(existsSync(join(dir, '.ratchet', 'ledger.jsonl'))).toBe(false);
    });
  }
});

describe('counts that plan tasks have upper bounds with the reason', () => {
  it.each([
    ['committee.size', (y: string) => y.replace('  size: 2', '  size: 1000000000000'), /at most 1,000 .*train task per round/],
    ['conditions[0].steps', (y: string) => y.replace('    steps: 10\n', '    steps: 99999999999\n'), /at most 1,000,000,000 .*would not end/],
    ['stages.sample.perturb.count', (y: string) => y.replace('      count: 1', '      count: 5000000'), /at most 100,000/],
    ['stages.label.frames_per_task', (y: string) => y.replace(/frames_per_task: \d+/, 'frames_per_task: 5000000000'), /at most 1,000,000/],
  ])('%s', async (key, edit, re) => {
    const dir = mkdtempSync(join(root, 'b-'));
    writeFileSync(join(dir, 'start.xyz'), startXyz());
    writeFileSync(join(dir, 'campaign.yaml'), edit(campaignYaml()));
    const e = (await loadCampaign(join(dir, 'campaign.yaml')).catch((x: unknown) => x)) as CampaignError;
    expect(e).toBeInstanceOf(CampaignError);
    expect(e.keyPath).toBe(key);
    expect(e.detail).toMatch(re);
  });
});

describe('one pass reports every problem', () => {
  it('a key typo does not hide a missing start file', async () => {
    const dir = mkdtempSync(join(root, 'p-'));
    writeFileSync(join(dir, 'campaign.yaml'), campaignYaml().replace('holdout: 0.5', 'holdot: 0.5'));
    const e = (await loadCampaign(join(dir, 'campaign.yaml')).catch((x: unknown) => x)) as CampaignError;
    expect(e).toBeInstanceOf(CampaignError);
    expect(e.problems.map((p) => p.keyPath)).toEqual(['start', 'holdot']);
    expect(e.problems[0].detail).toContain('cannot read starting structure "start.xyz"');
    expect(e.problems[1].detail).toContain("did you mean 'holdout'?");
  });
});
