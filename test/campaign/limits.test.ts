/**
 * The campaign's gate limits (stages.validate.errors.*, max_drift, max_excursion, drift_min_*): a number is the fail
 * limit, {warn, fail} sets both, the defaults are the table of src/gates/limits.ts, and bad values are refused by the
 * loader with the file, line and key.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { CampaignError, loadCampaign } from '../../src/campaign/load.js';

const campaignText = (validate: string) => `name: argon
species: [Ar]
start: start.xyz
conditions:
  - {name: c30, temperature: 30, steps: 100}
stages:
  label: {command: ./label.sh}
  train: {command: ./train.sh}
  validate:
    command: ./validate.sh
${validate}
  simulate: {command: ./md.sh}
`;
// line 11 is the first line of `validate` given here

let dir: string;
let n = 0;
beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'ratchet-campaign-limits-'));
  writeFileSync(join(dir, 'start.xyz'), '1\nLattice="5.26 0 0 0 5.26 0 0 0 5.26" Properties=species:S:1:pos:R:3 pbc="T T T"\nAr 0 0 0\n');
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

async function load(validate: string) {
  const file = join(dir, `c${n++}.yaml`);
  writeFileSync(file, campaignText(validate));
  return (await loadCampaign(file)).campaign.stages.validate;
}
async function refusal(validate: string): Promise<string> {
  try {
    await load(validate);
  } catch (err) {
    expect(err).toBeInstanceOf(CampaignError);
    return (err as Error).message.replace(/^.*c\d+\.yaml/, 'campaign.yaml');
  }
  throw new Error('expected the campaign to be rejected');
}

describe('campaign gate limits', () => {
  it('a number is the fail limit (the warn default drops to it when above); a mapping sets either or both', async () => {
    const v = await load('    errors: {energy_rmse: 3, force_rmse: {warn: 40, fail: 80}, stress_rmse: 0.5}\n    max_drift: 0.05\n    max_excursion: {warn: 2}');
    expect(v.errors.energy_rmse).toEqual({ warn: 3, fail: 3 });
    expect(v.errors.force_rmse).toEqual({ warn: 40, fail: 80 });
    expect(v.errors.stress_rmse).toEqual({ warn: null, fail: 0.5 });
    expect(v.errors.force_mae).toEqual({ warn: null, fail: null });
    expect(v.max_drift).toEqual({ warn: 0.05, fail: 0.05 });
    expect(v.max_excursion).toEqual({ warn: 2, fail: 100 });
  });

  it('warn above fail is refused, with the line and key', async () => {
    expect(await refusal('    errors: {force_rmse: {warn: 150, fail: 50}}')).toMatch(
      /^campaign\.yaml:11:\d+: stages\.validate\.errors\.force_rmse: expected the warn limit at most the fail limit \(warn 150 meV\/Å is above fail 50 meV\/Å\)/,
    );
  });

  it('a negative limit and an unknown key inside a limit are refused', async () => {
    expect(await refusal('    max_drift: -1')).toBe('campaign.yaml:11:16: stages.validate.max_drift: expected a fail limit in meV/atom/ps above 0, found -1');
    expect(await refusal('    max_drift: fast')).toMatch(/^campaign\.yaml:11:16: stages\.validate\.max_drift: expected a limit in meV\/atom\/ps above 0 \(the fail limit\), or a mapping \{warn, fail\}/);
    expect(await refusal('    max_drift: {warn: 0.1, fial: 1}')).toMatch(/^campaign\.yaml:11:\d+: stages\.validate\.max_drift/);
    expect(await refusal('    drift_min_frames: 2')).toMatch(/^campaign\.yaml:11:\d+: stages\.validate\.drift_min_frames: expected a whole number of frames of at least 3/);
  });
});
