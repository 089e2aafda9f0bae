/**
 * `ratchet export` on a finished two-round campaign (engine fixture): the bundle is re-read, every
 * hash in its manifest checked with coreutils' `sha256sum`, the data set loaded with Debian's ASE
 * (`from ase.io import read`, an independent extended XYZ reader), the provenance validated against
 * the PROV-JSON schema (W3C Member Submission "PROV-JSON", 2013; schema from
 * https://openprovenance.org/prov-json/schema, kept in test/fixtures/), and `--verify` catches a
 * changed, a missing and an extra file.
 */
import { execFileSync, spawnSync } from 'node:child_process';
import { appendFileSync, mkdtempSync, readFileSync, rmSync, unlinkSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import Ajv from 'ajv-draft-04';
import { REPO, cliArgs, ledgerEvents, removeCampaigns, twoRoundCampaign } from '../engine/fixture.js';

const outs: string[] = [];
afterAll(() => {
  removeCampaigns();
  for (const o of outs) rmSync(o, { recursive: true, force: true });
});

let dir = '';
let file = '';
beforeAll(async () => {
  ({ dir, file } = await twoRoundCampaign());
}, 240_000);

function cli(...args: string[]) {
  return spawnSync(process.execPath, [...cliArgs(), 'export', ...args], { cwd: REPO, encoding: 'utf8', timeout: 120_000 });
}

function bundle(...extra: string[]): string {
  const root = mkdtempSync(join(tmpdir(), 'ratchet-export-'));
  outs.push(root);
  const b = join(root, 'bundle');
  const r = cli(file, b, ...extra);
  expect(r.stderr).toBe('');
  expect(r.status).toBe(0);
  return b;
}

const aseCount = (path: string): number =>
  Number(execFileSync('/usr/bin/python3', ['-c', 'import sys\nfrom ase.io import read\nprint(len(read(sys.argv[1], index=":")))', path], { encoding: 'utf8' }).trim());

describe('ratchet export', () => {
  let b = '';
  beforeAll(() => {
    b = bundle();
  }, 120_000);

  it('writes the committee, the data set, the campaign file, the report and provenance, each with its sha256', () => {
    const m = JSON.parse(readFileSync(join(b, 'manifest.json'), 'utf8'));
    expect(m.format).toBe('ratchet-export-v1');
    expect(m.round).toBe(1);
    expect(m.tool_version).toBe(JSON.parse(readFileSync(join(REPO, 'package.json'), 'utf8')).version);
    const paths = m.files.map((f: any) => f.path);
    expect(paths).toEqual(['campaign.yaml', 'committee/0000/model', 'committee/0001/model', 'data/test.xyz', 'data/train.xyz', 'provenance.prov.json', 'report.html']);
    for (const f of m.files) expect(execFileSync('sha256sum', [join(b, f.path)], { encoding: 'utf8' }).split(' ')[0]).toBe(f.sha256);
    // The copies are the registered artifacts: same content hash as the ledger's ids.
    const models = ledgerEvents(dir).filter((e) => e.type === 'artifact' && e.role === 'model' && e.task.startsWith('r1/'));
    expect(m.files.filter((f: any) => f.role === 'model').map((f: any) => `sha256:${f.sha256}`).sort()).toEqual(models.map((x) => x.id).sort());
    expect(readFileSync(join(b, 'campaign.yaml'), 'utf8')).toBe(readFileSync(file, 'utf8'));
  });

  it('the data set loads with ASE: training and held-out frames as the label gate counted them', () => {
    const label = ledgerEvents(dir).filter((e) => e.type === 'stage_gated' && e.stage === 'label' && e.round === 1).at(-1)!;
    expect(aseCount(join(b, 'data/train.xyz'))).toBe(label.figures.train_frames);
    expect(aseCount(join(b, 'data/test.xyz'))).toBe(label.figures.test_frames);
  });

  it('the provenance validates against the PROV-JSON schema and reaches the starting structures', () => {
    const schema = JSON.parse(readFileSync(join(REPO, 'test/fixtures/prov-json.schema.json'), 'utf8'));
    const validate = new Ajv.default({ strict: false }).compile(schema); // CommonJS module: its class is .default
    const doc = JSON.parse(readFileSync(join(b, 'provenance.prov.json'), 'utf8'));
    expect(validate(doc)).toBe(true);
    const start = ledgerEvents(dir).find((e) => e.type === 'artifact' && e.role === 'start')!;
    expect(Object.keys(doc.entity)).toContain(start.id);
  });

  it('--verify passes a fresh bundle and fails a changed, a missing or an extra file, exit 1', () => {
    expect(spawnSync(process.execPath, [...cliArgs(), 'export', '--verify', b], { cwd: REPO, encoding: 'utf8' }).status).toBe(0);
    const c = bundle();
    appendFileSync(join(c, 'data/train.xyz'), ' ');
    unlinkSync(join(c, 'committee/0001/model'));
    writeFileSync(join(c, 'notes.txt'), 'x');
    const r = cli('--verify', c);
    expect(r.status).toBe(1);
    expect(r.stdout).toContain('changed  data/train.xyz');
    expect(r.stdout).toContain('missing  committee/0001/model');
    expect(r.stdout).toContain('extra    notes.txt');
  });

  it('--round 0 exports round 0\'s committee; a round without one is refused by name', () => {
    const c = bundle('--round', '0');
    const m = JSON.parse(readFileSync(join(c, 'manifest.json'), 'utf8'));
    expect(m.round).toBe(0);
    const r0 = ledgerEvents(dir).filter((e) => e.type === 'artifact' && e.role === 'model' && e.task.startsWith('r0/'));
    expect(m.files.filter((f: any) => f.role === 'model').map((f: any) => `sha256:${f.sha256}`).sort()).toEqual(r0.map((x) => x.id).sort());
    const r = cli(file, join(c, '..', 'other'), '--round', '7');
    expect(r.status).toBe(2);
    expect(r.stderr).toContain('--round 7: no committee was trained in that round (rounds with one: 0, 1)');
  });

  it('refuses a folder that is not empty', () => {
    const r = cli(file, b);
    expect(r.status).toBe(2);
    expect(r.stderr).toContain('the folder is not empty');
  });
});
