/**
 * One table of limits: `ratchet check errors|drift|contacts` with no options and the campaign's validate gate with a
 * campaign whose limits are all defaults judge the same files the same way (identical verdicts, reasons and figures).
 * The campaign side uses the schema's parsed defaults and the same option mapping as the validate stage
 * (src/engine/stages/validate-limits.ts); the check side runs the real command in-process and reads its --json.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { register } from '../../src/cli/check.js';
import { inProcess } from '../cli/in-process.js';
import { parseCampaign } from '../../src/campaign/schema.js';
import { checkErrors } from '../../src/gates/errors.js';
import { checkDrift } from '../../src/gates/drift.js';
import { checkContacts } from '../../src/gates/contacts.js';
import { resultJson } from '../../src/gates/format.js';
import { COMMITTEE_DEFAULTS, CONTACTS_DEFAULTS, LIMITS } from '../../src/gates/defaults.js';
import { driftGateOptions, errorsGateOptions } from '../../src/engine/stages/validate-limits.js';
import { writeFrames } from '../../src/atoms/xyz/writer.js';
import { lcg, makeFrame } from './helpers.js';


/** `ratchet check ... --json` in-process: the parsed JSON and the exit code. */
async function checkJson(...args: string[]): Promise<{ code: number; json: Record<string, unknown> }> {
  const r = await inProcess(register, ['check', ...args, '--json']);
  return { code: r.code, json: r.stdout ? (JSON.parse(r.stdout) as Record<string, unknown>) : {} };
}

const campaign = (validate: Record<string, unknown> = {}) =>
  parseCampaign({
    name: 'parity',
    species: ['Au', 'Cu'],
    start: 'start.xyz',
    conditions: [{ name: 'c', temperature: 300, steps: 10 }],
    stages: {
      label: { command: 'true' },
      train: { command: 'true' },
      validate: { command: 'true', ...validate },
      simulate: { command: 'true' },
    },
  });
const plain = (x: unknown) => JSON.parse(JSON.stringify(x));

let dir: string;
const at = (name: string) => join(dir, name);
beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'ratchet-limits-parity-'));
  // errors: 3 frames (too few: warn) and 12 frames of AuCu3 with per-element force errors near the limits
  const r = lcg(21);
  const species = ['Au', 'Cu', 'Cu', 'Cu'];
  const positions = [0, 0, 0, 1.8, 1.8, 0, 1.8, 0, 1.8, 0, 1.8, 1.8];
  for (const [name, n, au, cu] of [
    ['few', 3, 0.02, 0.02],
    ['au', 12, 0.16, 0.09],
    ['ok', 12, 0.03, 0.02],
  ] as const) {
    const ref = [];
    const pred = [];
    for (let k = 0; k < n; k++) {
      const fr = Array.from({ length: 12 }, () => r() - 0.5);
      const fp = fr.map((x, c) => x + (c < 3 ? au : cu) * (r() < 0.5 ? -1 : 1));
      ref.push(makeFrame({ species, positions, info: { energy: -10 }, arrays: { forces: fr } }));
      pred.push(makeFrame({ species, positions, info: { energy: -10 + 0.024 * (r() - 0.5) }, arrays: { forces: fp } }));
    }
    await writeFrames(at(`${name}-ref.xyz`), ref);
    await writeFrames(at(`${name}-pred.xyz`), pred);
  }
  // drift: total energy series (4 Cu atoms, periodic) with a time in fs
  const g = lcg(5);
  for (const [name, n, dt, slope, noise] of [
    ['short', 6, 10, 0, 0.01],
    ['drifting', 201, 10, 0.5, 0.01],
    ['noisy', 201, 10, 0.2, 6],
    ['flat', 101, 10, 0, 0.01],
  ] as const) {
    const frames = Array.from({ length: n }, (_, k) =>
      makeFrame({
        species: ['Cu', 'Cu', 'Cu', 'Cu'],
        positions: [0, 0, 0, 1.8, 1.8, 0, 1.8, 0, 1.8, 0, 1.8, 1.8],
        cell: [3.6, 0, 0, 0, 3.6, 0, 0, 0, 3.6],
        info: { total_energy: 4 * (-3 + slope * 1e-6 * k * dt + noise * 1e-3 * (g() - 0.5)), time: k * dt },
      }),
    );
    await writeFrames(at(`${name}.xyz`), frames);
  }
  await writeFrames(at('close.xyz'), [makeFrame({ species: ['Cu', 'Au'], positions: [0, 0, 0, 1.2, 0, 0], info: { energy: -1 } })]);
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('limits parity: ratchet check with no options = the campaign gate with default limits', () => {
  const v = campaign().stages.validate;

  it('the parsed campaign defaults are the table', () => {
    for (const name of ['energy_rmse', 'energy_mae', 'force_rmse', 'force_mae', 'stress_rmse'] as const)
      expect(v.errors[name]).toEqual({ warn: LIMITS[name].warn, fail: LIMITS[name].fail });
    expect(v.max_drift).toEqual({ warn: LIMITS.max_drift.warn, fail: LIMITS.max_drift.fail });
    expect(v.max_excursion).toEqual({ warn: LIMITS.max_excursion.warn, fail: LIMITS.max_excursion.fail });
    expect(v.contacts.scale).toBe(CONTACTS_DEFAULTS.scale);
    expect(v.contacts.hydrogen_scale).toBe(CONTACTS_DEFAULTS.hydrogenScale);
    const c = campaign();
    expect(c.stages.label.contacts.scale).toBe(CONTACTS_DEFAULTS.scale);
    expect(c.stages.simulate.contacts.scale).toBe(CONTACTS_DEFAULTS.scale);
    expect(c.stages.sample.select.window).toMatchObject({ lower: COMMITTEE_DEFAULTS.lower, upper: COMMITTEE_DEFAULTS.upper });
  });

  it.each(['few', 'au', 'ok'])('errors on %s: same verdict, reasons and figures', async (name) => {
    const cli = await checkJson('errors', at(`${name}-ref.xyz`), at(`${name}-pred.xyz`));
    const gate = await checkErrors(at(`${name}-ref.xyz`), at(`${name}-pred.xyz`), errorsGateOptions(v));
    expect(cli.json).toEqual(plain(resultJson(gate)));
    expect(cli.code).toBe(gate.verdict === 'fail' ? 1 : 0);
  });

  it('the data above covers every verdict', async () => {
    const verdicts = await Promise.all(['few', 'au', 'ok'].map(async (n) => (await checkErrors(at(`${n}-ref.xyz`), at(`${n}-pred.xyz`), errorsGateOptions(v))).verdict));
    expect(verdicts).toEqual(['warn', 'fail', 'pass']);
    const drift = await Promise.all(['short', 'drifting', 'noisy', 'flat'].map(async (n) => (await checkDrift([at(`${n}.xyz`)], driftGateOptions(v))).verdict));
    expect(drift).toEqual(['fail', 'warn', 'pass', 'pass']);
    const noisy = await checkDrift([at('noisy.xyz')], driftGateOptions(v));
    expect(noisy.reasons.some((x) => x.includes('within 2 standard errors of zero'))).toBe(true);
  });

  it.each(['short', 'drifting', 'noisy', 'flat'])('drift on %s: same verdict, reasons and figures', async (name) => {
    const cli = await checkJson('drift', at(`${name}.xyz`));
    const gate = await checkDrift([at(`${name}.xyz`)], driftGateOptions(v));
    expect(cli.json).toEqual(plain(resultJson(gate)));
  });

  it('contacts: same verdict and figures', async () => {
    const cli = await checkJson('contacts', at('close.xyz'));
    const gate = await checkContacts([at('close.xyz')], { scale: v.contacts.scale, hydrogenScale: v.contacts.hydrogen_scale, pairLimits: v.contacts.min_distance });
    expect(cli.json).toEqual(plain(resultJson(gate)));
    expect(gate.verdict).toBe('fail');
  });

  it('set limits too: a campaign number is the fail limit, as --<name>-fail; {warn, fail} as both options', async () => {
    const c = campaign({ errors: { force_rmse: 120, energy_rmse: { warn: 1, fail: 3 } }, max_drift: { warn: 0.2, fail: 0.4 } }).stages.validate;
    const cli = await checkJson('errors', at('au-ref.xyz'), at('au-pred.xyz'), '--force-rmse-fail', '120', '--energy-rmse-warn', '1', '--energy-rmse-fail', '3');
    const gate = await checkErrors(at('au-ref.xyz'), at('au-pred.xyz'), errorsGateOptions(c));
    expect(cli.json).toEqual(plain(resultJson(gate)));
    const dc = await checkJson('drift', at('drifting.xyz'), '--max-drift-warn', '0.2', '--max-drift-fail', '0.4');
    const dg = await checkDrift([at('drifting.xyz')], driftGateOptions(c));
    expect(dc.json).toEqual(plain(resultJson(dg)));
    expect(dg.verdict).toBe('fail');
  });
});
