/**
 * The data-hygiene rule (src/select/hygiene.ts): nothing a model, an MD program or a user wrote on a frame
 * reaches the labeler's input, on both paths that make labeler input (round 0's perturbed starts and later
 * rounds' picks from trajectories), whatever the key's name. Checked with ratchet's reader and, independently,
 * with Debian's ASE (python3-ase): the keys ASE sees in the frames sent are only the allowed ones.
 * All structures are invented data.
 */
import { execFileSync } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import type { Frame } from '../../src/atoms/frame.js';
import { readFrames } from '../../src/atoms/xyz/reader.js';
import { cleanForLabeling, forDataSet, forLabeling, PROVENANCE_KEYS } from '../../src/select/hygiene.js';
import { committeeSamplePolicy } from '../../src/select/policy.js';

const dir = mkdtempSync(join(tmpdir(), 'ratchet-hygiene-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const PY = '/usr/bin/python3';
const hasAse = existsSync(PY) && (() => {
  try {
    execFileSync(PY, ['-c', 'import ase'], { stdio: 'ignore' });
    return true;
  } catch {
    return false;
  }
})();

/** Every key ASE sees on each frame of a file: info keys, per-atom arrays, calculator results. */
function aseKeys(path: string): { info: string[]; arrays: string[]; calc: string[] }[] {
  const py = `
import sys, json
from ase.io import read
out = []
for a in read(sys.argv[1], index=':'):
    calc = sorted(a.calc.results.keys()) if a.calc is not None else []
    out.append({'info': sorted(a.info.keys()), 'arrays': sorted(a.arrays.keys()), 'calc': calc})
print(json.dumps(out))
`;
  return JSON.parse(execFileSync(PY, ['-c', py, path], { encoding: 'utf8' }));
}

/**
 * An MD program's trajectory that writes everything it knows: 8 Ar atoms on a 3.5 Å grid in a 7 Å box,
 * four committee force arrays with a chosen spread d on atom 0 (members +d, -d, +d, -d along x, so the
 * spread is d), and extra info and per-atom keys, some of a user's own naming, one (committee_spread,
 * condition) pretending to be ratchet's provenance.
 */
function dirtyXyz(spreads: number[]): string {
  let text = '';
  spreads.forEach((d, f) => {
    const props = 'species:S:1:pos:R:3:velocities:R:3:momenta:R:3:magmoms:R:1:charges:R:1:energies:R:1:my_col:I:1:forces:R:3:forces_0:R:3:forces_1:R:3:forces_2:R:3:forces_3:R:3';
    const info = [
      'energy=-0.5',
      'free_energy=-0.49',
      'total_energy=-0.2',
      'temperature=90.0',
      `time=${10 * f}`,
      'stress="0.01 0.0 0.0 0.0 0.01 0.0 0.0 0.0 0.01"',
      'virial="1.0 0.0 0.0 0.0 1.0 0.0 0.0 0.0 1.0"',
      'dipole="0.1 0.2 0.3"',
      'my_key=abc',
      'committee_spread=99.0',
      'condition=smuggled',
    ].join(' ');
    text += `8\nLattice="7.0 0.0 0.0 0.0 7.0 0.0 0.0 0.0 7.0" Properties=${props} ${info} pbc="T T T"\n`;
    let a = 0;
    for (let i = 0; i < 2; i++)
      for (let j = 0; j < 2; j++)
        for (let k = 0; k < 2; k++) {
          const pos = [3.5 * i + 0.05 * Math.sin(a + f), 3.5 * j + 0.05 * Math.cos(a + 2 * f), 3.5 * k];
          const m = (s: number) => [a === 0 ? s * d : 0, 0, 0];
          const cols = [...pos, 0.01, 0.02, 0.03, 0.4, 0.8, 1.2, 0.5, -0.1, -0.06, 7, 0.1, 0.2, 0.3, ...m(1), ...m(-1), ...m(1), ...m(-1)];
          text += `Ar ${cols.map((x) => (Number.isInteger(x) && x === 7 ? '7' : x.toFixed(8))).join(' ')}\n`;
          a++;
        }
  });
  return text;
}

const params = {
  perturb: { count: 2, displacement: 0.05, strain: 0.01, seed: 0 },
  select: { window: { lower: 0.05, upper: 0.5 }, max_per_condition: 3, fingerprint: { cutoff: 3.4, bins: 16 } },
  contacts: { scale: 0.5, min_distance: {} },
  species: ['Ar'],
};

async function all(path: string): Promise<Frame[]> {
  const out: Frame[] = [];
  for await (const f of readFrames(path)) out.push(f);
  return out;
}

/** The keys a frame sent for labeling may carry on `path` (ratchet's reader, then ASE). */
async function expectOnlyAllowed(path: string, frames: number, provenance: string[]): Promise<Frame[]> {
  const got = await all(path);
  expect(got).toHaveLength(frames);
  for (const f of got) {
    expect([...f.arrays.keys()]).toEqual([]);
    expect([...f.info.keys()].sort()).toEqual([...provenance].sort());
    for (const k of f.info.keys()) expect(PROVENANCE_KEYS as readonly string[]).toContain(k);
  }
  if (!hasAse) {
    console.warn('hygiene.test: /usr/bin/python3 with ase not found: ASE cross-check skipped');
    return got;
  }
  for (const k of aseKeys(path)) {
    // ASE always holds numbers and positions as arrays; nothing else may be there.
    expect(k.arrays).toEqual(['numbers', 'positions']);
    expect(k.calc).toEqual([]);
    expect(k.info.sort()).toEqual([...provenance].sort());
  }
  return got;
}

describe('the data-hygiene rule', () => {
  it('later rounds: no key a model or MD program wrote reaches the labeler; provenance is ratchet\'s own', async () => {
    const traj = join(dir, 'hot.xyz');
    writeFileSync(traj, dirtyXyz([0.01, 0.1, 0.2, 0.3, 0.8]));
    const out = join(dir, 'frames-r1.xyz');
    const res = await committeeSamplePolicy({
      round: 1,
      seed: 3,
      kind: 'trajectories',
      sources: [{ path: traj, artifact: 'sha256:ee', condition: 'hot' }],
      params,
      committee: 4,
      output: out,
    });
    // three informative frames (0.1, 0.2, 0.3): the cap is 3
    expect(res.frames).toBe(3);
    const got = await expectOnlyAllowed(out, 3, ['source_artifact', 'source_frame', 'condition', 'committee_spread']);
    const spreads = [0.01, 0.1, 0.2, 0.3, 0.8];
    for (const f of got) {
      expect(f.info.get('condition')).toBe('hot');
      expect(f.info.get('source_artifact')).toBe('sha256:ee');
      expect(f.info.get('committee_spread')).toBeCloseTo(spreads[f.info.get('source_frame') as number], 12);
    }
  });

  it('round 0: starting structures carrying any keys give perturbed copies with the structure and provenance only', async () => {
    const start = join(dir, 'start.xyz');
    writeFileSync(start, dirtyXyz([0, 0]));
    const out = join(dir, 'frames-r0.xyz');
    const res = await committeeSamplePolicy({ round: 0, seed: 1, kind: 'start', sources: [{ path: start, artifact: 'sha256:cc' }], params, committee: 4, output: out });
    expect(res.frames).toBe(4);
    const got = await expectOnlyAllowed(out, 4, ['source_artifact', 'source_frame', 'perturbation']);
    expect(got.map((f) => f.info.get('perturbation'))).toEqual([0, 1, 0, 1]);
  });

  it('a frame already on its way keeps only its provenance keys; the rule is idempotent', async () => {
    const [f] = await all(join(dir, 'hot.xyz'));
    const c = cleanForLabeling(f);
    expect([...c.info.keys()].sort()).toEqual(['committee_spread', 'condition']);
    expect(c.arrays.size).toBe(0);
    const sent = forLabeling(f, { source_artifact: 'sha256:ee', source_frame: 0, condition: 'hot' });
    const again = cleanForLabeling(sent);
    expect([...again.info]).toEqual([...sent.info]);
    expect(Array.from(again.positions)).toEqual(Array.from(f.positions));
    expect(Array.from(again.cell!)).toEqual(Array.from(f.cell!));
    // the input is not changed
    expect(f.arrays.has('forces_0')).toBe(true);
    expect(() => forLabeling(f, { my_key: 1 } as never)).toThrow(/my_key is not one of ratchet's provenance keys/);
  });

  it('a data-set frame: the structure sent, energy, forces and stress of the labels, provenance of the frame sent', async () => {
    const [raw] = await all(join(dir, 'hot.xyz'));
    const sent = forLabeling(raw, { source_artifact: 'sha256:ee', source_frame: 0, condition: 'hot' });
    // a labeler that kept everything, moved atom 0 by 1e-6 Å (rounding) and lost the provenance
    const labeled: Frame = { ...raw, positions: new Float64Array(raw.positions), info: new Map(raw.info) };
    labeled.positions[0] += 1e-6;
    labeled.info.delete('condition');
    const d = forDataSet(sent, labeled);
    expect([...d.info.keys()].sort()).toEqual(['condition', 'energy', 'source_artifact', 'source_frame', 'stress']);
    expect(d.info.get('condition')).toBe('hot');
    expect(d.info.get('stress')).toEqual([0.01, 0, 0, 0, 0.01, 0, 0, 0, 0.01]);
    expect([...d.arrays.keys()]).toEqual(['forces']);
    expect(d.positions[0]).toBe(sent.positions[0]);
  });
});
