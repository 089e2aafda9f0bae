/**
 * Programs in the lineage: a stage lists the files and folders its command runs (`programs`, relative
 * to the campaign file); each task's record in the ledger (task_submitted) carries their sha256, and
 * `ratchet lineage` shows them per task. A label program changed between rounds shows as two hashes.
 *
 * Independent checks: a file's hash is compared with coreutils `sha256sum`; a folder's with Python's
 * hashlib over the directory manifest format documented in src/ledger/artifacts.ts and docs/ledger.md
 * ("ratchet-dir-v1\n", then "f <sha256> <-|x> <relative path>\n" per file in byte order of the paths).
 */
import { execFileSync, spawnSync } from 'node:child_process';
import { copyFileSync, mkdirSync, readFileSync, appendFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { campaignJsonSchema } from '../../src/campaign/jsonschema.js';
import { runCampaign } from '../../src/engine/run.js';
import { BufferOutput } from '../../src/engine/output.js';
import { lineageQuery, renderAnswer } from '../../src/ledger/query.js';
import type { LineageNode } from '../../src/ledger/lineage.js';
import { FAKE, REPO, campaignYaml, cliArgs, ledgerEvents, makeCampaign, removeCampaigns } from './fixture.js';

afterAll(removeCampaigns);

async function run(file: string, extra: { until?: string } = {}) {
  const errors: string[] = [];
  const r = await runCampaign({ campaign: file, out: new BufferOutput(), error: (m) => errors.push(m), ...extra });
  return { ...r, errors: errors.join('\n') };
}

const sha256sum = (path: string): string => `sha256:${execFileSync('sha256sum', [path], { encoding: 'utf8' }).split(' ')[0]}`;

/** The folder hash computed by Python from the documented manifest format (regular files only here). */
function pythonDirHash(dir: string): string {
  const script = `
import hashlib, os, sys
root = sys.argv[1]
entries = []
for d, dirs, files in os.walk(root):
    dirs[:] = [x for x in dirs if x != '__pycache__']
    for f in files:
        p = os.path.join(d, f)
        rel = os.path.relpath(p, root).replace(os.sep, '/')
        entries.append((rel.encode(), p))
m = hashlib.sha256(b'ratchet-dir-v1\\n')
for rel, p in sorted(entries):
    h = hashlib.sha256(open(p, 'rb').read()).hexdigest()
    x = 'x' if os.stat(p).st_mode & 0o100 else '-'
    m.update(f'f {h} {x} '.encode() + rel + b'\\n')
print(m.hexdigest())
`;
  return `sha256:${execFileSync('/usr/bin/python3', ['-c', script, dir], { encoding: 'utf8' }).trim()}`;
}

/** A campaign whose label command is a program kept beside the campaign file, listed with a settings folder. */
function programCampaign(programs = '[label.mjs, lib]'): { dir: string; file: string } {
  const c = makeCampaign({ maxRounds: 3, commands: { label: 'node "$RATCHET_CAMPAIGN_DIR/label.mjs" label' } });
  copyFileSync(FAKE, join(c.dir, 'label.mjs'));
  mkdirSync(join(c.dir, 'lib', 'basis'), { recursive: true });
  writeFileSync(join(c.dir, 'lib', 'settings.toml'), 'cutoff = 5.0\n');
  writeFileSync(join(c.dir, 'lib', 'basis', 'Ar.txt'), 'invented basis\n');
  const yaml = campaignYaml({ maxRounds: 3, commands: { label: 'node "$RATCHET_CAMPAIGN_DIR/label.mjs" label' } })
    .replace(/^  label:\n/m, `  label:\n    programs: ${programs}\n`)
    // A constant-energy run of 1 ps (1 fs steps), long enough for the drift gate to judge it.
    .replace(/nve_steps: \d+/, 'nve_steps: 1000');
  writeFileSync(c.file, yaml);
  return c;
}

function taskNodes(n: LineageNode, out = new Map<string, LineageNode>()): Map<string, LineageNode> {
  if (n.task && !out.has(n.task.id)) out.set(n.task.id, n);
  for (const c of n.children) taskNodes(c, out);
  return out;
}

describe('programs a stage runs', () => {
  it('is a campaign key that the JSON Schema and `ratchet schema` know', () => {
    const label = (campaignJsonSchema() as any).properties.stages.properties.label.properties;
    expect(label.programs.type).toBe('array');
    expect(label.programs.items.type).toBe('string');
    const { dir, file } = programCampaign();
    const cli = (f: string) => spawnSync(process.execPath, [...cliArgs(), 'schema', f], { cwd: REPO, encoding: 'utf8' });
    const ok = cli(file);
    expect(ok.status, ok.stderr).toBe(0);
    writeFileSync(join(dir, 'bad.yaml'), readFileSync(file, 'utf8').replace('programs: [label.mjs, lib]', 'programs: label.mjs'));
    const bad = cli(join(dir, 'bad.yaml'));
    expect(bad.status).toBe(2);
    expect(bad.stderr).toMatch(/bad\.yaml:\d+:\d+: stages\.label\.programs: expected a list of program files or folders/);
  }, 60_000);

  it('refuses a listed program that does not exist, naming the file, line and key (exit 2, nothing written)', async () => {
    const { dir, file } = programCampaign('[label.mjs, nothere.py]');
    const r = await run(file);
    expect(r.exitCode).toBe(2);
    expect(r.errors).toMatch(new RegExp(`${file.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')}:\\d+:\\d+: stages\\.label\\.programs\\[1\\]: cannot read program "nothere.py" .*no such file or directory`));
    expect(ledgerEvents(dir)).toEqual([]);
  });

  it('hashes the programs into every task record; a program changed between rounds shows in lineage', async () => {
    const { dir, file } = programCampaign();
    const label0 = sha256sum(join(dir, 'label.mjs'));
    const lib0 = pythonDirHash(join(dir, 'lib'));
    const first = await run(file, { until: 'r1/label' });
    expect(first.exitCode, first.errors).toBe(0);

    // Between rounds: the label program is edited; Python's byte-code cache appears in the folder.
    appendFileSync(join(dir, 'label.mjs'), '\n// round 1: a changed label program\n');
    mkdirSync(join(dir, 'lib', '__pycache__'));
    writeFileSync(join(dir, 'lib', '__pycache__', 'x.cpython-311.pyc'), 'cache');
    const label1 = sha256sum(join(dir, 'label.mjs'));
    expect(label1).not.toBe(label0);
    expect(pythonDirHash(join(dir, 'lib'))).toBe(lib0);
    const second = await run(file, { until: 'r1/validate' });
    expect(second.exitCode, second.errors).toBe(0);

    // The ledger: every label task's submission carries the programs it ran; other stages list none.
    const subs = ledgerEvents(dir).filter((e) => e.type === 'task_submitted');
    const labelSubs = subs.filter((e) => /^r\d+\/label\//.test(e.task));
    expect(labelSubs.length).toBeGreaterThanOrEqual(2);
    for (const e of labelSubs) {
      expect(e.programs, e.task).toEqual({ 'label.mjs': e.task.startsWith('r0/') ? label0 : label1, lib: lib0 });
    }
    for (const e of subs.filter((x) => !/\/label\//.test(x.task))) expect(e.programs, e.task).toBeUndefined();

    // Lineage of a round-1 model reaches the label tasks of both rounds, each with its own program hash.
    const model = ledgerEvents(dir).find((e) => e.type === 'artifact' && e.role === 'model' && String(e.task).startsWith('r1/'));
    expect(model).toBeDefined();
    const answer = await lineageQuery({ target: model!.path, campaign: dir, cwd: dir });
    const tasks = taskNodes(answer.tree);
    const r0 = [...tasks.values()].filter((n) => n.task!.id.startsWith('r0/label/'));
    const r1 = [...tasks.values()].filter((n) => n.task!.id.startsWith('r1/label/'));
    expect(r0.length).toBeGreaterThan(0);
    expect(r1.length).toBeGreaterThan(0);
    for (const n of r0) expect(n.task!.programs).toEqual({ 'label.mjs': label0, lib: lib0 });
    for (const n of r1) expect(n.task!.programs).toEqual({ 'label.mjs': label1, lib: lib0 });
    const text = renderAnswer(answer);
    expect(text).toContain(`programs: label.mjs ${label0.slice(7, 19)}, lib ${lib0.slice(7, 19)}`);
    expect(text).toContain(`programs: label.mjs ${label1.slice(7, 19)}, lib ${lib0.slice(7, 19)}`);

    // The same through the command line, as JSON (the path is taken relative to the campaign file's folder).
    const cli = spawnSync(process.execPath, [...cliArgs(), 'lineage', model!.path, '--campaign', file, '--json'], { cwd: REPO, encoding: 'utf8' });
    expect(cli.status, cli.stderr).toBe(0);
    const json = JSON.parse(cli.stdout);
    expect(json.campaign_file).toBe('campaign.yaml');
    const hashes = new Set([...taskNodes(json.tree).values()].filter((n) => /\/label\//.test(n.task!.id)).map((n) => n.task!.programs!['label.mjs']));
    expect(hashes).toEqual(new Set([label0, label1]));
  }, 180_000);
});
