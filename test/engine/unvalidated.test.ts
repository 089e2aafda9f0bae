/**
 * A way forward from a weak first committee (rounds.explore_unvalidated) and the spread calibration of
 * each round, through the engine with the invented stage programs of fake-stage.mjs.
 *
 * The calibration figures are cross-checked against an independent computation in NumPy (Debian's
 * python3-numpy, through /usr/bin/python3) that reads the label tasks' frames, the labels and the
 * committee forces of the source trajectories straight from the files, using the ledger's artifact records
 * to find each frame's source trajectory.
 */
import { execFileSync } from 'node:child_process';
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { BufferOutput } from '../../src/engine/output.js';
import { runCampaign } from '../../src/engine/run.js';
import { unvalidatedSteps } from '../../src/engine/unvalidated.js';
import { ledgerEvents, makeCampaign, removeCampaigns } from './fixture.js';
import { buildStatus, formatStatus } from '../../src/engine/status.js';
import { foldEvents } from '../../src/engine/state.js';
import { campaignView } from '../../src/engine/view.js';
import { loadCampaign } from '../../src/campaign/load.js';
import type { Campaign } from '../../src/campaign/schema.js';
import type { LedgerEvent } from '../../src/ledger/journal.js';

afterAll(removeCampaigns);

const EXPLORE = `  explore_unvalidated:
    max_rounds: 1
    steps_fraction: 0.5
`;

/** The fixture's rounds block with the explore setting added under it. */
function withExplore(yaml: string): string {
  return yaml.replace(/(rounds:\n  max: \d+\n)/, `$1${EXPLORE}`);
}

describe('a round whose validation fails explores when the campaign allows it', () => {
  const c = makeCampaign({ maxRounds: 3 });
  writeFileSync(c.file, withExplore(readFileSync(c.file, 'utf8')));
  writeFileSync(join(c.dir, 'bad-validate-errors'), '');
  const out = new BufferOutput();
  let exitCode = -1;
  let events: Record<string, any>[] = [];

  let loadedCampaign: Campaign | undefined;
  beforeAll(async () => {
    loadedCampaign = (await loadCampaign(c.file)).campaign;
    const r = await runCampaign({ campaign: c.file, out, error: (m) => out.line(`error: ${m}`) });
    exitCode = r.exitCode;
    events = ledgerEvents(c.dir);
  }, 240_000);

  it('records the waiver, runs short simulations and never converges on an unvalidated round', () => {
    const gated = events.find((e) => e.type === 'stage_gated' && e.round === 0 && e.stage === 'validate')!;
    expect(gated.verdict).toBe('fail');
    const waived = events.filter((e) => e.type === 'validation_waived');
    expect(waived[0]).toMatchObject({ round: 0, in_a_row: 1 });
    // Steps: half of each condition's 10 steps, in whole multiples of write_every: at least one interval.
    const every = loadedCampaign!.conditions.map((k) => k.write_every);
    expect(waived[0].steps).toEqual({ cold: unvalidatedSteps(10, every[0], 0.5), warm: unvalidatedSteps(10, every[1], 0.5) });
    expect(waived[0].steps.cold).toBeLessThan(10);
    const task = JSON.parse(readFileSync(join(c.dir, 'rounds/r0/simulate/cold/task.json'), 'utf8'));
    expect(task.params).toMatchObject({ steps: waived[0].steps.cold, validated: false });
    const judged = events.find((e) => e.type === 'round_judged' && e.round === 0)!;
    expect(judged.state).toBe('continue');
    expect(judged.reasons.join(' ')).toContain('round 0 was not validated');
    expect(out.text).toContain('r0/validate  not validated: round 0 explores anyway');
  });

  it('stops at the next failed validation once the rounds in a row are used up', () => {
    expect(exitCode).toBe(1);
    expect(events.filter((e) => e.type === 'validation_waived')).toHaveLength(1);
    expect(out.text).toContain('r1/validate is blocked by its gate');
    expect(out.text).toContain('not exploring without validation: 1 round(s) in a row already went on without validation');
    expect(events.some((e) => e.type === 'campaign_ended')).toBe(false);
  });

  it('measures the spread calibration of round 1 on the frames it labeled, as NumPy does from the files', () => {
    const label = events.find((e) => e.type === 'stage_gated' && e.round === 1 && e.stage === 'label')!;
    const cal = label.figures.calibration;
    expect(cal.models_round).toBe(0);
    expect(cal.frames).toBeGreaterThan(0);
    expect(label.gates.map((g: any) => g.gate)).toContain('calibration');
    const script = String.raw`
import json, sys, glob, os
import numpy as np
from ase.io import read
d = sys.argv[1]
paths = {}
for line in open(os.path.join(d, '.ratchet/ledger.jsonl')):
    e = json.loads(line)
    if e.get('type') == 'artifact': paths[e['id']] = os.path.join(d, e['path'])
ratios = []
for task in sorted(glob.glob(os.path.join(d, 'rounds/r1/label/*/'))):
    sent = read(os.path.join(task, 'frames.xyz'), index=':')
    lab = read(os.path.join(task, 'labeled.xyz'), index=':')
    for s, l in zip(sent, lab):
        traj = read(paths[s.info['source_artifact']], index=int(s.info['source_frame']))
        m = 0
        while 'forces_%d' % m in traj.arrays: m += 1
        F = np.array([traj.arrays['forces_%d' % k] for k in range(m)])
        mean = F.mean(axis=0)
        spread = np.sqrt(((F - mean) ** 2).sum(axis=2).mean(axis=0)).max()
        err = np.linalg.norm(mean - l.get_forces(), axis=1).max()
        ratios.append(err / spread)
print(json.dumps({'n': len(ratios), 'median': float(np.quantile(ratios, 0.5)), 'p90': float(np.quantile(ratios, 0.9))}))
`;
    let ref: { n: number; median: number; p90: number } | null = null;
    try {
      execFileSync('/usr/bin/python3', ['-c', 'import ase, numpy']);
      ref = JSON.parse(execFileSync('/usr/bin/python3', ['-c', script, c.dir]).toString());
    } catch (err) {
      if (String(err).includes('import ase, numpy')) console.warn('ASE/NumPy not available: calibration cross-check skipped');
      else throw err;
    }
    // status shows it, text and JSON alike
    const st = buildStatus(campaignView({ campaign: loadedCampaign!, dir: c.dir, file: c.file, sha256: '' }), foldEvents(events as LedgerEvent[]), c.file);
    expect(st.rounds[1].calibration).toMatchObject({ frames: cal.frames, median: cal.median, p90: cal.p90 });
    expect(st.rounds[0].unvalidated?.reason).toContain('rounds.explore_unvalidated');
    const text = new BufferOutput();
    formatStatus(st, text);
    expect(text.text).toContain('not validated: r0');
    expect(text.text).toMatch(/r1 {2}models of r0: median \d+\.\d\d, 90th percentile/);
    if (ref) {
      expect(cal.frames).toBe(ref.n);
      expect(cal.median).toBeCloseTo(ref.median, 6);
      expect(cal.p90).toBeCloseTo(ref.p90, 6);
    }
  });
});

describe('without the setting a failed validation blocks the round', () => {
  const c = makeCampaign({ maxRounds: 3 });
  writeFileSync(join(c.dir, 'bad-validate-errors'), '');
  it('blocks at r0/validate and records no waiver', async () => {
    const out = new BufferOutput();
    const r = await runCampaign({ campaign: c.file, out, error: (m) => out.line(`error: ${m}`) });
    expect(r.exitCode).toBe(1);
    expect(out.text).toContain('r0/validate is blocked by its gate');
    expect(ledgerEvents(c.dir).some((e) => e.type === 'validation_waived')).toBe(false);
  }, 240_000);
});

describe('unvalidatedSteps', () => {
  it('keeps whole write intervals, at least one, never more than asked', () => {
    expect(unvalidatedSteps(1000, 10, 0.1)).toBe(100);
    expect(unvalidatedSteps(1000, 10, 0.001)).toBe(10);
    expect(unvalidatedSteps(1000, 30, 0.1)).toBe(90);
    expect(unvalidatedSteps(5, 10, 0.5)).toBe(5);
  });
});
