/** `ratchet status` as a process: text and --json, on a fresh and on a half-run campaign; exit 2 for bad input. */
import { spawnSync } from 'node:child_process';
import { afterAll, describe, expect, it } from 'vitest';
import { runCampaign } from '../../src/engine/run.js';
import { BufferOutput } from '../../src/engine/output.js';
import { REPO, cliArgs, makeCampaign, removeCampaigns } from '../engine/fixture.js';

const ratchet = (args: string[], env: Record<string, string> = { NO_COLOR: '1' }) =>
  spawnSync(process.execPath, [...cliArgs(), ...args], { cwd: REPO, env: { ...process.env, ...env }, encoding: 'utf8', timeout: 120_000 });

afterAll(removeCampaigns);

describe('ratchet status', () => {
  it('says nothing has run on a fresh campaign', () => {
    const { file } = makeCampaign();
    const r = ratchet(['status', file]);
    expect(r.status).toBe(0);
    expect(r.stdout).toContain('ledger: 0 events');
    expect(r.stdout).toContain(`nothing has run yet; start with: ratchet run --dry-run ${file}`);
  });

  it('shows rounds by stages, verdicts and what comes next, as text and as JSON', async () => {
    const { file } = makeCampaign();
    const done = await runCampaign({ campaign: file, until: 'r0/validate', out: new BufferOutput() });
    expect(done.exitCode).toBe(0);
    const r = ratchet(['status', file]);
    expect(r.status).toBe(0);
    expect(r.stdout).toMatch(/round\s+sample\s+label\s+train\s+validate\s+simulate/);
    expect(r.stdout).toMatch(/r0\s+pass 1\/1\s+pass 3\/3\s+pass 2\/2\s+·/);
    expect(r.stdout).toMatch(/r0\/label\s+pass\s+6 frame\(s\) labeled; training set \d+, held out \d+/);
    expect(r.stdout).toContain(`next: r0/validate; run: ratchet run ${file}`);
    expect(r.stdout).not.toContain('\x1b[');
    const j = ratchet(['status', file, '--json']);
    expect(j.status).toBe(0);
    const report = JSON.parse(j.stdout);
    expect(report.at).toEqual({ round: 0, stage: 'validate' });
    expect(report.rounds[0].stages.map((s: any) => s.phase)).toEqual(['passed', 'passed', 'passed', 'pending', 'pending']);
    expect(report.rounds[0].stages[1]).toMatchObject({ stage: 'label', tasks: 3, counts: { succeeded: 3 }, verdict: 'pass' });
    expect(report.campaign.name).toBe('engine test');
  }, 240_000);

  it('exit 2 for a campaign it cannot read', () => {
    const r = ratchet(['status', '/nonexistent/campaign.yaml']);
    expect(r.status).toBe(2);
    expect(r.stderr).toContain('/nonexistent/campaign.yaml');
  });
});
