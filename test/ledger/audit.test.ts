/**
 * `ratchet audit` on a finished campaign (the engine fixture, run once, then copied per case): a clean
 * campaign exits 0; one byte changed in a model, a trajectory deleted, a stray file added, a ledger
 * line cut or removed: each is reported and exits 1; a second audit hashes only what changed. Hashes
 * are checked against coreutils' `sha256sum` (an independent implementation).
 */
import { execFileSync, spawnSync } from 'node:child_process';
import { appendFileSync, cpSync, existsSync, mkdtempSync, readFileSync, rmSync, truncateSync, unlinkSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { auditCampaign } from '../../src/ledger/audit.js';
import { REPO, cliArgs, ledgerEvents, removeCampaigns, twoRoundCampaign } from '../engine/fixture.js';

const copies: string[] = [];
afterAll(() => {
  removeCampaigns();
  for (const c of copies) rmSync(c, { recursive: true, force: true });
});

let dir = '';
let file = '';
beforeAll(async () => {
  ({ dir, file } = await twoRoundCampaign());
}, 240_000);

/** A fresh copy of the finished campaign (so each case breaks its own). */
function copy(): string {
  const root = mkdtempSync(join(tmpdir(), 'ratchet-audit-'));
  copies.push(root);
  const d = join(root, 'c');
  cpSync(dir, d, { recursive: true });
  return d;
}

function cli(d: string, ...args: string[]) {
  return spawnSync(process.execPath, [...cliArgs(), 'audit', join(d, 'campaign.yaml'), ...args], { cwd: REPO, encoding: 'utf8', timeout: 120_000 });
}

function sha256sum(path: string): string {
  return execFileSync('sha256sum', [path], { encoding: 'utf8' }).split(' ')[0];
}

const artifacts = () => ledgerEvents(dir).filter((e) => e.type === 'artifact');

describe('ratchet audit', () => {
  it('a clean campaign: every registered file matches sha256sum, nothing stray, exit 0', () => {
    const d = copy();
    for (const a of artifacts().filter((x) => x.kind === 'file')) {
      const latest = artifacts().filter((x) => x.path === a.path).at(-1)!;
      expect(`sha256:${sha256sum(join(d, a.path))}`).toBe(latest.id);
    }
    const r = cli(d, '--json');
    expect(r.stderr).toBe('');
    expect(r.status).toBe(0);
    const j = JSON.parse(r.stdout);
    expect(j.clean).toBe(true);
    expect(j.registered).toBe(new Set(artifacts().map((a) => a.path)).size);
    expect(j.ok).toBe(j.registered);
    expect(j.hashed).toBe(j.registered); // all files: the fixture registers no directories
    expect(j.bookkeeping).toBeGreaterThan(0); // task.json, run.sh, logs, exit records
    expect(j.ledger.problems).toEqual([]);
  });

  it('reports one byte changed in a model, a deleted trajectory and a stray file, exit 1', () => {
    const d = copy();
    const model = artifacts().find((a) => a.role === 'model')!;
    const traj = artifacts().find((a) => /simulate\/.*trajectory\.xyz$/.test(a.path))!;
    const bytes = readFileSync(join(d, model.path));
    bytes[0] ^= 0x01;
    writeFileSync(join(d, model.path), bytes);
    unlinkSync(join(d, traj.path));
    writeFileSync(join(d, 'rounds/r0/train/stray.xyz'), '1\n\nAr 0 0 0\n');
    const r = cli(d);
    expect(r.status).toBe(1);
    expect(r.stdout).toContain(`changed  ${model.path}`);
    expect(r.stdout).toContain(`now sha256:${sha256sum(join(d, model.path)).slice(0, 12)}`);
    expect(r.stdout).toContain(`missing  ${traj.path}`);
    expect(r.stdout).toContain('stray    rounds/r0/train/stray.xyz');
    expect(r.stdout).toMatch(/NOT clean\n$/);
  });

  it('an extra output inside a task folder is fine (no gate read it) and said so', async () => {
    const d = copy();
    writeFileSync(join(d, 'rounds/r0/train/0000/checkpoint.bin'), 'x');
    const r = await auditCampaign(d);
    expect(r.unread_outputs.map((u) => u.path)).toEqual(['rounds/r0/train/0000/checkpoint.bin']);
    expect(r.clean).toBe(true);
  });

  it('reports a ledger whose last line was cut short, and one with a line removed, exit 1', () => {
    const d = copy();
    const led = join(d, '.ratchet/ledger.jsonl');
    const size = readFileSync(led).length;
    truncateSync(led, size - 10); // the last line loses its end and its newline
    const r = cli(d);
    expect(r.status).toBe(1);
    const n = readFileSync(led, 'utf8').split('\n').length;
    expect(r.stdout).toContain(`${led}:${n}: the last line was cut short`);

    const d2 = copy();
    const led2 = join(d2, '.ratchet/ledger.jsonl');
    const lines = readFileSync(led2, 'utf8').split('\n');
    const removed = JSON.parse(lines[4]).seq;
    lines.splice(4, 1);
    writeFileSync(led2, lines.join('\n'));
    const r2 = cli(d2);
    expect(r2.status).toBe(1);
    expect(r2.stdout).toContain(`${led2}:5: seq ${removed + 1} follows seq ${removed - 1}: 1 event(s) missing`);
  });

  it('a second audit hashes only what changed since the first; --full hashes all again', async () => {
    const d = copy();
    const first = await auditCampaign(d);
    expect(first.hashed).toBe(first.registered);
    expect(existsSync(join(d, '.ratchet/audit.json'))).toBe(true);
    const again = await auditCampaign(d);
    expect(again.hashed).toBe(0);
    expect(again.from_cache).toBe(first.registered);
    const model = artifacts().find((a) => a.role === 'model')!;
    appendFileSync(join(d, model.path), ' ');
    const third = await auditCampaign(d);
    expect(third.hashed).toBe(1);
    expect(third.changed.map((c) => c.path)).toEqual([model.path]);
    // A stray file added after an audit: its folder's mtime changed, so the incremental audit lists it again.
    writeFileSync(join(d, 'rounds/r1/label/extra.xyz'), 'x');
    const fourth = await auditCampaign(d);
    expect(fourth.unregistered.map((u) => u.path)).toEqual(['rounds/r1/label/extra.xyz']);
    expect(fourth.bookkeeping).toBe(first.bookkeeping);
    const full = await auditCampaign(d, { full: true });
    expect(full.hashed).toBe(first.registered);
  });

  it('a directory that is not a campaign is refused with exit 2', () => {
    const d = mkdtempSync(join(tmpdir(), 'ratchet-audit-none-'));
    copies.push(d);
    writeFileSync(join(d, 'campaign.yaml'), 'name: x\n');
    const r = cli(d);
    expect(r.status).toBe(2);
    expect(r.stderr).toContain('no .ratchet/ folder here');
  });
});
