/**
 * The demo loop end to end, reduced for CI: the argon demo's stage programs (examples/argon/*.ts) run
 * by the engine on the local backend, with two of the demo's conditions (the cold crystal at 30 K and
 * the liquid at 120 K, above argon's triple point of 83.8 K, NIST Chemistry WebBook) and shorter runs.
 * Checked from the campaign's own files and ledger:
 * - it converges, and the confident fraction of the condition that held it back rises across rounds;
 * - the held-out split is stable: a frame (named by where it came from, not by a hash) is in test.xyz
 *   in every round or in train.xyz in every round, never in both;
 * - every frame picked after round 0 comes from the informative band of its source trajectory frame
 *   (spread recomputed here from the trajectory's forces_0..forces_{M-1} with the definition in
 *   design.md, independent of the gates' code) and from before any contact (distance recomputed here).
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Frame } from '../../src/atoms/frame.js';
import { readFrames } from '../../src/atoms/xyz/reader.js';
import { BufferOutput } from '../../src/engine/output.js';
import { runCampaign } from '../../src/engine/run.js';
import { campaignStatus } from '../../src/engine/status.js';
import { LOWER, MIN_DISTANCE, UPPER, writeReducedArgon } from './argon-reduced.js';

async function frames(path: string): Promise<Frame[]> {
  const out: Frame[] = [];
  for await (const f of readFrames(path)) out.push(f);
  return out;
}

/** Where a labeled frame came from: its source artifact, frame index and perturbation copy. */
const origin = (f: Frame): string => `${f.info.get('source_artifact')}#${f.info.get('source_frame')}#${f.info.get('perturbation') ?? ''}`;

/** Committee spread of a frame (design.md): max over atoms of sqrt(mean_m |F_i^m - mean_m F_i|^2). */
function spread(f: Frame, models: number): number {
  const n = f.species.length;
  const F = Array.from({ length: models }, (_, m) => f.arrays.get(`forces_${m}`)!.values as Float64Array);
  let worst = 0;
  for (let i = 0; i < n; i++) {
    let s = 0;
    for (let c = 0; c < 3; c++) {
      const mean = F.reduce((a, x) => a + x[3 * i + c], 0) / models;
      for (const x of F) s += (x[3 * i + c] - mean) ** 2;
    }
    worst = Math.max(worst, Math.sqrt(s / models));
  }
  return worst;
}

/** Smallest minimum-image distance of a cubic periodic cell (brute force; the demo cells are cubic). */
function minDistance(f: Frame): number {
  const L = f.cell![0];
  const p = f.positions;
  let best = Infinity;
  for (let i = 0; i < f.species.length; i++)
    for (let j = i + 1; j < f.species.length; j++) {
      let d2 = 0;
      for (let c = 0; c < 3; c++) {
        let d = p[3 * j + c] - p[3 * i + c];
        d -= L * Math.round(d / L);
        d2 += d * d;
      }
      best = Math.min(best, Math.sqrt(d2));
    }
  return best;
}

describe('the argon demo loop (reduced)', () => {
  const dir = mkdtempSync(join(tmpdir(), 'ratchet-argon-'));
  const file = writeReducedArgon(dir);
  const out = new BufferOutput();
  let exitCode = -1;

  beforeAll(async () => {
    exitCode = (await runCampaign({ campaign: file, out, error: (m) => out.line(`error: ${m}`) })).exitCode;
  }, 600_000);
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  let rounds = 0;

  it('converges, with the confident fraction rising across rounds', async () => {
    expect(exitCode, out.text).toBe(0);
    const s = await campaignStatus(file, () => undefined);
    const r = s.report!;
    expect(r.ended?.state, out.text).toBe('converged');
    rounds = r.rounds.length;
    expect(rounds).toBeGreaterThan(1);
    const worst = r.rounds.map((rr) => Math.min(...Object.values(rr.conditions!).map((c) => c.confident_fraction ?? 0)));
    expect(worst[0]).toBeLessThan(0.98);
    expect(worst[worst.length - 1]).toBeGreaterThanOrEqual(0.98);
    expect(worst[worst.length - 1]).toBeGreaterThan(worst[0]);
    expect(out.text).toMatch(/campaign converged in round \d+/);
  });

  it('keeps the held-out split stable across rounds', async () => {
    const where = new Map<string, string>();
    let previous = { train: 0, test: 0 };
    for (let k = 0; k < rounds; k++) {
      const train = await frames(join(dir, `rounds/r${k}/label/train.xyz`));
      const test = await frames(join(dir, `rounds/r${k}/label/test.xyz`));
      expect(train.length).toBeGreaterThanOrEqual(previous.train);
      expect(test.length).toBeGreaterThanOrEqual(previous.test);
      previous = { train: train.length, test: test.length };
      for (const [set, list] of [['train', train], ['test', test]] as const) {
        for (const f of list) {
          const o = origin(f);
          expect(where.get(o) ?? set, o).toBe(set);
          where.set(o, set);
        }
      }
    }
    const sets = [...where.values()];
    expect(sets).toContain('test');
    expect(sets).toContain('train');
  });

  it('picks only informative frames from before any contact', async () => {
    let checked = 0;
    for (let k = 1; k < rounds; k++) {
      const picked = await frames(join(dir, `rounds/r${k}/sample/0000/frames.xyz`));
      for (const f of picked) {
        const cond = f.info.get('condition') as string;
        const traj = await frames(join(dir, `rounds/r${k - 1}/simulate/${cond}/trajectory.xyz`));
        const src = traj[f.info.get('source_frame') as number];
        const s = spread(src, 4);
        expect(s).toBeGreaterThanOrEqual(LOWER);
        expect(s).toBeLessThan(UPPER);
        expect(Array.from(f.positions)).toEqual(Array.from(src.positions));
        for (const g of traj.slice(0, (f.info.get('source_frame') as number) + 1)) expect(minDistance(g)).toBeGreaterThan(MIN_DISTANCE);
        checked++;
      }
    }
    expect(checked).toBeGreaterThan(0);
  });
});
