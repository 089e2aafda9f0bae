import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import type { Frame } from '../../src/atoms/frame.js';
import { readFrames } from '../../src/atoms/xyz/reader.js';
import { writeFrames } from '../../src/atoms/xyz/writer.js';
import { committeeSamplePolicy } from '../../src/select/policy.js';
import { seededRandom } from '../../src/select/random.js';

const dir = mkdtempSync(join(tmpdir(), 'ratchet-policy-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

/**
 * A constructed trajectory (invented data for a selection check): 8 Ar atoms on a simple cubic grid of
 * spacing 3.5 Å in a 7 Å box, jiggled; four committee force arrays that differ from their mean by a
 * chosen amount, so each frame's spread (and band) is known by construction: members get +d, -d, +d, -d
 * on atom 0's x component, giving a per-atom spread sqrt(mean(d^2)) = d.
 */
function trajectory(spreads: number[], contactAt: number | null, seed: string): Frame[] {
  const rng = seededRandom(seed);
  return spreads.map((d, f) => {
    const pos: number[] = [];
    for (let i = 0; i < 2; i++) for (let j = 0; j < 2; j++) for (let k = 0; k < 2; k++) pos.push(3.5 * i, 3.5 * j, 3.5 * k);
    for (let q = 0; q < pos.length; q++) pos[q] += 0.2 * rng.normal();
    if (contactAt !== null && f >= contactAt) {
      // put atom 1 0.5 Å from atom 0: far below 0.5 x (2 x 1.06 Å), Cordero's Ar radius
      pos[3] = pos[0] + 0.5;
      pos[4] = pos[1];
      pos[5] = pos[2];
    }
    const arrays = new Map<string, { type: 'R'; width: number; values: Float64Array }>();
    for (let m = 0; m < 4; m++) {
      const v = new Float64Array(24);
      v[0] = m % 2 === 0 ? d : -d;
      arrays.set(`forces_${m}`, { type: 'R', width: 3, values: v });
    }
    return {
      species: Array(8).fill('Ar'),
      positions: Float64Array.from(pos),
      cell: Float64Array.from([7, 0, 0, 0, 7, 0, 0, 0, 7]),
      pbc: [true, true, true],
      arrays,
      info: new Map<string, number>([['energy', -0.5], ['time', 10 * f]]),
    } as Frame;
  });
}

const params = {
  perturb: { count: 3, displacement: 0.05, strain: 0.01, seed: 0 },
  select: { window: { lower: 0.05, upper: 0.5 }, max_per_condition: 4, fingerprint: { cutoff: 3.4, bins: 16 } },
  contacts: { scale: 0.5, min_distance: {} },
  species: ['Ar'],
};

describe('committee sample policy', () => {
  it('picks informative frames only, before the first contact, at most the cap per condition, with provenance', async () => {
    // frame spreads: confident (0.01), informative (0.1 .. 0.4), runaway (0.8)
    const cold = trajectory([0.01, 0.1, 0.2, 0.8, 0.3, 0.01, 0.15, 0.25, 0.35, 0.4], null, 'cold');
    const hot = trajectory([0.1, 0.2, 0.3, 0.01, 0.2, 0.3, 0.2, 0.3], 4, 'hot');
    await writeFrames(join(dir, 'cold.xyz'), cold);
    await writeFrames(join(dir, 'hot.xyz'), hot);
    const out = join(dir, 'frames.xyz');
    const res = await committeeSamplePolicy({
      round: 1,
      seed: 5,
      kind: 'trajectories',
      sources: [
        { path: join(dir, 'cold.xyz'), artifact: 'sha256:aa', condition: 'cold' },
        { path: join(dir, 'hot.xyz'), artifact: 'sha256:bb', condition: 'hot' },
      ],
      params,
      committee: 4,
      output: out,
    });
    expect(res.conditions!.cold).toEqual({ frames: 10, selected: 4, confident: 2, informative: 7, runaway: 1 });
    // hot: frames 0..3 before the contact; informative among them: 0, 1, 2 -> 3 picks
    expect(res.conditions!.hot).toEqual({ frames: 8, selected: 3, confident: 1, informative: 7, runaway: 0 });
    expect(res.notes).toContain('hot: frames from 4 on left out (first contact violation in frame 4)');
    const picked: Frame[] = [];
    for await (const f of readFrames(out)) picked.push(f);
    expect(picked.length).toBe(res.frames);
    expect(res.frames).toBe(7);
    const coldSpreads = [0.01, 0.1, 0.2, 0.8, 0.3, 0.01, 0.15, 0.25, 0.35, 0.4];
    for (const f of picked) {
      const src = f.info.get('source_artifact');
      const idx = f.info.get('source_frame') as number;
      expect(['sha256:aa', 'sha256:bb']).toContain(src);
      if (src === 'sha256:bb') expect(idx).toBeLessThan(4);
      else {
        expect(coldSpreads[idx]).toBeGreaterThanOrEqual(0.05);
        expect(coldSpreads[idx]).toBeLessThan(0.5);
        expect(f.info.get('committee_spread')).toBeCloseTo(coldSpreads[idx], 12);
      }
      // model outputs are stripped before labeling
      expect([...f.arrays.keys()].some((k) => k.startsWith('forces'))).toBe(false);
      expect(f.info.has('energy')).toBe(false);
    }
    // frames are written in file order; selection starts from the largest informative spread (0.4, frame 9 of cold)
    const coldPicks = picked.filter((f) => f.info.get('source_artifact') === 'sha256:aa').map((f) => f.info.get('source_frame'));
    expect(coldPicks).toContain(9);
    expect(coldPicks).toEqual([...coldPicks].sort((x, y) => (x as number) - (y as number)));
  });

  it('round 0 writes the requested number of perturbed copies of each starting structure, repeatably', async () => {
    const start = trajectory([0, 0], null, 'start');
    await writeFrames(join(dir, 'start.xyz'), start);
    const run = async (out: string) =>
      committeeSamplePolicy({
        round: 0,
        seed: 1,
        kind: 'start',
        sources: [{ path: join(dir, 'start.xyz'), artifact: 'sha256:cc' }],
        params,
        committee: 4,
        output: out,
      });
    const a = await run(join(dir, 'r0a.xyz'));
    await run(join(dir, 'r0b.xyz'));
    expect(a.frames).toBe(6);
    const fa: Frame[] = [];
    for await (const f of readFrames(join(dir, 'r0a.xyz'))) fa.push(f);
    const fb: Frame[] = [];
    for await (const f of readFrames(join(dir, 'r0b.xyz'))) fb.push(f);
    expect(fa.map((f) => f.info.get('source_frame'))).toEqual([0, 0, 0, 1, 1, 1]);
    expect(fa.map((f) => Array.from(f.positions))).toEqual(fb.map((f) => Array.from(f.positions)));
    expect(Array.from(fa[0].positions)).not.toEqual(Array.from(fa[1].positions));
  });
});
