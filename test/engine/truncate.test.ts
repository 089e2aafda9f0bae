/**
 * The simulate gate at a contact violation (invented stage programs, see fake-stage.mjs): the stage is
 * not failed; the frames before the first violation are kept in trajectory.kept.xyz, registered as an
 * artifact made from the raw trajectory; the cut is recorded in the verdict's figures; the next round
 * samples only from the kept frames; and the condition cannot converge while its run is cut.
 * Contact limit: 0.5 x (1.06 + 1.06) Å = 1.06 Å for Ar-Ar (covalent radius of Ar, Cordero et al. 2008,
 * scale 0.5 the campaign default), so two atoms 0.5 Å apart are a violation; the fcc neighbours at
 * 3.7 Å are not.
 */
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { readFrames } from '../../src/atoms/xyz/reader.js';
import { runCampaign } from '../../src/engine/run.js';
import { BufferOutput } from '../../src/engine/output.js';
import { campaignStatus, formatStatus } from '../../src/engine/status.js';
import { ledgerEvents, makeCampaign, removeCampaigns } from './fixture.js';

afterAll(removeCampaigns);

async function frames(path: string) {
  const out = [];
  for await (const f of readFrames(path)) out.push(f);
  return out;
}

describe('simulate: a trajectory with a contact violation', () => {
  const { dir, file } = makeCampaign({ maxRounds: 2 });
  writeFileSync(join(dir, 'contact-simulate-warm'), '');
  const out = new BufferOutput();
  let exitCode = -1;
  let events: Record<string, any>[] = [];

  beforeAll(async () => {
    const r = await runCampaign({ campaign: file, out, error: (m) => out.line(`error: ${m}`) });
    exitCode = r.exitCode;
    events = ledgerEvents(dir);
  }, 240_000);

  it('warns instead of failing, records the cut, and keeps the frames before it', async () => {
    const gated = events.filter((e) => e.type === 'stage_gated' && e.stage === 'simulate');
    expect(gated.map((e) => [e.round, e.verdict])).toEqual([
      [0, 'warn'],
      [1, 'warn'],
    ]);
    const r0 = gated[0];
    expect(r0.figures.truncated).toEqual([{ condition: 'warm', first_violation_frame: 6, frames_written: 10, frames_kept: 6 }]);
    expect(r0.figures.conditions.cold.truncated).toBeUndefined();
    expect(r0.figures.conditions.warm.frames).toBe(6);
    expect(r0.reasons.join('\n')).toMatch(/r0\/simulate\/warm: contacts warn: trajectory cut at its first contact violation, frame 6: 6 of 10 frame\(s\) kept/);

    const raw = await frames(join(dir, 'rounds/r0/simulate/warm/trajectory.xyz'));
    const kept = await frames(join(dir, 'rounds/r0/simulate/warm/trajectory.kept.xyz'));
    expect(raw).toHaveLength(10);
    expect(kept).toHaveLength(6);
    kept.forEach((f, k) => expect(Array.from(f.positions)).toEqual(Array.from(raw[k].positions)));

    const arts = events.filter((e) => e.type === 'artifact');
    const rawArt = arts.find((e) => e.path === 'rounds/r0/simulate/warm/trajectory.xyz');
    const keptArt = arts.find((e) => e.path === 'rounds/r0/simulate/warm/trajectory.kept.xyz');
    expect(keptArt).toMatchObject({ role: 'trajectory_kept', inputs: [rawArt!.id], task: 'r0/simulate/warm' });
    expect(arts.some((e) => e.path === 'rounds/r0/simulate/cold/trajectory.kept.xyz')).toBe(false);
  });

  it('samples the next round from the kept frames only', async () => {
    const keptId = events.find((e) => e.type === 'artifact' && e.path === 'rounds/r0/simulate/warm/trajectory.kept.xyz')!.id;
    const picked = await frames(join(dir, 'rounds/r1/sample/0000/frames.xyz'));
    const fromWarm = picked.filter((f) => f.info.get('condition') === 'warm');
    expect(fromWarm.length).toBeGreaterThan(0);
    for (const f of fromWarm) {
      expect(f.info.get('source_artifact')).toBe(keptId);
      expect(f.info.get('source_frame') as number).toBeLessThan(6);
    }
  });

  it('does not let the cut condition converge, and says why', () => {
    // Round 1's trajectories are all confident (fake-stage.mjs); without the cut the campaign would converge.
    expect(exitCode).toBe(0);
    const end = events.find((e) => e.type === 'campaign_ended');
    expect(end).toMatchObject({ state: 'exhausted', round: 1, holding: ['warm'] });
    expect(end!.reasons).toContain('warm: its run was cut at frame 6 because two atoms came too close, so it did not finish');
    expect(readFileSync(join(dir, '.ratchet/ledger.jsonl'), 'utf8')).not.toMatch(/"state":"converged"/);
  });

  it('marks the cut condition in the status table', async () => {
    const s = await campaignStatus(file, () => undefined);
    const text = new BufferOutput();
    formatStatus(s.report!, text);
    expect(text.text).toMatch(/r1\s+1\.000\s+1\.000 cut/);
    expect(text.text).toContain('cut: the trajectory was cut at its first contact violation');
  });
});
