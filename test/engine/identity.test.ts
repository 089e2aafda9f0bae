/**
 * One state per campaign file: a folder's ledger and rounds belong to the campaign file that created
 * them (recorded as the ledger's first event). Another campaign file in the same folder is refused by
 * run, retry, run --dry-run, status and lineage (exit 2, both files named, what to do), and nothing is
 * written; editing the campaign file itself is allowed; a ledger written before campaigns were recorded
 * is adopted by the file that runs first.
 */
import { spawnSync } from 'node:child_process';
import { copyFileSync, cpSync, existsSync, mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { runCampaign } from '../../src/engine/run.js';
import { BufferOutput } from '../../src/engine/output.js';
import { campaignStatus } from '../../src/engine/status.js';
import { lineageQuery, LineageQueryError } from '../../src/ledger/query.js';
import { REPO, cliArgs, ledgerEvents, makeCampaign, removeCampaigns } from './fixture.js';

afterAll(removeCampaigns);

async function run(file: string, extra: { until?: string; dryRun?: boolean; retry?: string } = {}) {
  const errors: string[] = [];
  const out = new BufferOutput();
  const r = await runCampaign({ campaign: file, out, error: (m) => errors.push(m), ...extra });
  return { ...r, text: out.text, errors: errors.join('\n') };
}

async function status(file: string) {
  const errors: string[] = [];
  const r = await campaignStatus(file, (m) => errors.push(m));
  return { ...r, errors: errors.join('\n') };
}

const ledgerText = (dir: string) => readFileSync(join(dir, '.ratchet', 'ledger.jsonl'), 'utf8');

/** A second campaign file beside the first: the same settings under another name (another condition set, say). */
function otherFile(dir: string): string {
  const other = join(dir, 'other.yaml');
  writeFileSync(other, readFileSync(join(dir, 'campaign.yaml'), 'utf8').replace(/^name: .*$/m, 'name: "other condition"'));
  return other;
}

function expectRefusal(message: string, dir: string): void {
  expect(message).toContain(join(dir, 'other.yaml'));
  expect(message).toContain('campaign.yaml');
  expect(message).toContain('"engine test"');
  expect(message).toContain('put other.yaml in a folder of its own');
  expect(message).toContain(join(dir, 'other', 'other.yaml'));
}

describe('one state per campaign file', () => {
  it('records the campaign when the ledger is created and refuses another campaign file in the folder', async () => {
    const { dir, file } = makeCampaign();
    const first = await run(file, { until: 'r0/label' });
    expect(first.exitCode, first.errors).toBe(0);
    const events = ledgerEvents(dir);
    expect(events[0]).toMatchObject({ seq: 1, type: 'campaign_identity', name: 'engine test', file: 'campaign.yaml', path: file });
    expect(events[0].adopted).toBeUndefined();
    expect(events.filter((e) => e.type === 'campaign_identity')).toHaveLength(1);

    const other = otherFile(dir);
    const before = ledgerText(dir);
    const rounds = readdirSync(join(dir, 'rounds', 'r0'));

    const r = await run(other);
    expect(r.exitCode).toBe(2);
    expectRefusal(r.errors, dir);
    const dry = await run(other, { dryRun: true });
    expect(dry.exitCode).toBe(2);
    expectRefusal(dry.errors, dir);
    expect(dry.text).not.toContain('would');
    const retry = await run(other, { retry: 'r0/sample' });
    expect(retry.exitCode).toBe(2);
    expectRefusal(retry.errors, dir);
    const st = await status(other);
    expect(st.exitCode).toBe(2);
    expect(st.report).toBeUndefined();
    expectRefusal(st.errors, dir);
    const anyArtifact = ledgerEvents(dir).find((e) => e.type === 'artifact')!.path as string;
    await expect(lineageQuery({ target: anyArtifact, campaign: other, cwd: dir })).rejects.toThrow(LineageQueryError);
    await expect(lineageQuery({ target: anyArtifact, campaign: other, cwd: dir })).rejects.toThrow(/put other\.yaml in a folder of its own/);

    // Nothing was written by any of them.
    expect(ledgerText(dir)).toBe(before);
    expect(readdirSync(join(dir, 'rounds', 'r0'))).toEqual(rounds);

    // The owner goes on; lineage through the owner's file answers and names it.
    const own = await lineageQuery({ target: anyArtifact, campaign: file, cwd: dir });
    expect(own.campaign_file).toBe('campaign.yaml');
    const ownStatus = await status(file);
    expect(ownStatus.exitCode).toBe(0);
    expect(ownStatus.report!.campaign.recorded).toEqual({ name: 'engine test', file: 'campaign.yaml', path: file });
  });

  it('refuses through the command line with exit 2', () => {
    const { dir, file } = makeCampaign();
    const cli = (args: string[]) => spawnSync(process.execPath, [...cliArgs(), ...args], { cwd: REPO, encoding: 'utf8', env: { ...process.env, NO_COLOR: '1' } });
    const first = cli(['run', file, '--stop-before', 'r0/label']);
    expect(first.status, first.stderr).toBe(0);
    const other = otherFile(dir);
    for (const args of [['run', other], ['run', other, '--dry-run'], ['status', other], ['retry', other, 'r0/sample']]) {
      const r = cli(args);
      expect(r.status, `${args.join(' ')}: ${r.stderr}`).toBe(2);
      expect(r.stderr).toMatch(/^ratchet: /);
      expectRefusal(r.stderr, dir);
    }
  });

  it('allows editing the campaign file between runs, and a folder moved whole', async () => {
    const { dir, file } = makeCampaign();
    expect((await run(file, { until: 'r0/label' })).exitCode).toBe(0);
    // A revision: another name, another condition temperature.
    writeFileSync(file, readFileSync(file, 'utf8').replace('name: "engine test"', 'name: "engine test, revised"').replace('temperature: 90', 'temperature: 95'));
    const again = await run(file, { until: 'r0/train' });
    expect(again.exitCode, again.errors).toBe(0);
    expect(ledgerEvents(dir).filter((e) => e.type === 'campaign_identity')).toHaveLength(1);

    const moved = join(mkdtempSync(join(tmpdir(), 'ratchet-moved-')), 'campaign');
    cpSync(dir, moved, { recursive: true });
    try {
      const st = await status(join(moved, 'campaign.yaml'));
      expect(st.exitCode, st.errors).toBe(0);
      expect(st.report!.campaign.recorded!.file).toBe('campaign.yaml');
    } finally {
      rmSync(moved, { recursive: true, force: true });
    }
  });

  it('adopts a ledger written before campaigns were recorded for the file that runs first', async () => {
    const { dir, file } = makeCampaign();
    expect((await run(file, { until: 'r0/label' })).exitCode).toBe(0);
    // The same ledger as an older ratchet wrote it: no campaign_identity, seq from 1.
    const legacy = ledgerEvents(dir)
      .filter((e) => e.type !== 'campaign_identity')
      .map((e, i) => JSON.stringify({ ...e, seq: i + 1 }))
      .join('\n');
    writeFileSync(join(dir, '.ratchet', 'ledger.jsonl'), `${legacy}\n`);
    const n = legacy.split('\n').length;

    // Read-only commands accept it from any file: nothing is recorded yet.
    const other = otherFile(dir);
    const st = await status(other);
    expect(st.exitCode, st.errors).toBe(0);
    expect(st.report!.campaign.recorded).toBeUndefined();
    expect((await run(other, { dryRun: true })).exitCode).toBe(0);
    expect(ledgerEvents(dir)).toHaveLength(n);

    // The first run adopts it and says so; from then on the other file is refused.
    const r = await run(file, { until: 'r0/train' });
    expect(r.exitCode, r.errors).toBe(0);
    const ids = ledgerEvents(dir).filter((e) => e.type === 'campaign_identity');
    expect(ids).toHaveLength(1);
    expect(ids[0]).toMatchObject({ file: 'campaign.yaml', name: 'engine test', adopted: true });
    expect(ids[0].seq).toBeGreaterThan(n);
    const refused = await run(other);
    expect(refused.exitCode).toBe(2);
    expectRefusal(refused.errors, dir);
  });

  it('never creates a state for a refused file (no inputs copied, no plan folder)', async () => {
    const { dir, file } = makeCampaign();
    expect((await run(file, { until: 'r0/label' })).exitCode).toBe(0);
    const other = otherFile(dir);
    // Its starting structure lies outside the folder: a run would copy it into inputs/.
    const outside = mkdtempSync(join(tmpdir(), 'ratchet-outside-'));
    try {
      copyFileSync(join(dir, 'start.xyz'), join(outside, 'start.xyz'));
      writeFileSync(other, readFileSync(other, 'utf8').replace('start: start.xyz', `start: ${JSON.stringify(join(outside, 'start.xyz'))}`));
      expect((await run(other)).exitCode).toBe(2);
      expect((await run(other, { dryRun: true })).exitCode).toBe(2);
      expect(existsSync(join(dir, 'inputs'))).toBe(false);
      expect(existsSync(join(dir, '.ratchet', 'plan'))).toBe(false);
    } finally {
      rmSync(outside, { recursive: true, force: true });
    }
  });
});
