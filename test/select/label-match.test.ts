/**
 * Labels matched to the frames sent (src/select/label-match.ts): count, order, species, pbc, cell and
 * positions within 1e-4 Å. The tolerance is checked against an independent writer: a frame written by
 * Debian's ASE (python3-ase; its extended XYZ writer prints positions with 8 decimals) and read back
 * matches the frame it came from, while a 0.1 Å shift does not. Structures are invented data.
 */
import { execFileSync } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import type { Frame } from '../../src/atoms/frame.js';
import { readFrames } from '../../src/atoms/xyz/reader.js';
import { writeFrames } from '../../src/atoms/xyz/writer.js';
import { isHeldOut } from '../../src/select/holdout.js';
import { MATCH_TOLERANCE_A, matchFrames, structureDifference } from '../../src/select/label-match.js';
import { seededRandom } from '../../src/select/random.js';

const dir = mkdtempSync(join(tmpdir(), 'ratchet-match-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

/** 6 atoms at random (seeded) in a 6 Å box, positions with all 17 significant digits. */
function frame(seed: number): Frame {
  const rng = seededRandom(`match:${seed}`);
  return {
    species: ['O', 'H', 'H', 'O', 'H', 'H'],
    positions: Float64Array.from({ length: 18 }, () => 6 * rng.uniform()),
    cell: Float64Array.from([6, 0, 0, 0.3, 6, 0, 0, 0, 6]),
    pbc: [true, true, true],
    arrays: new Map(),
    info: new Map(),
  };
}

const copy = (f: Frame): Frame => ({ ...f, species: [...f.species], positions: new Float64Array(f.positions), cell: f.cell ? new Float64Array(f.cell) : null, pbc: [...f.pbc] as Frame['pbc'] });

describe('structureDifference', () => {
  it('accepts the same structure within the tolerance and names the atom that moved beyond it', () => {
    const f = frame(1);
    const g = copy(f);
    g.positions[3 * 4] += 0.5 * MATCH_TOLERANCE_A;
    expect(structureDifference(f, g)).toBeNull();
    g.positions[3 * 4 + 1] += 0.1;
    expect(structureDifference(f, g)).toBe('atom 4 moved 0.1000 Å from the frame sent (tolerance 0.0001 Å)');
    g.positions[3 * 4 + 1] = f.positions[3 * 4 + 1] + 2 * MATCH_TOLERANCE_A;
    expect(structureDifference(f, g)).toMatch(/^atom 4 moved 0\.0002 Å/);
  });

  it('accepts an atom wrapped into the cell by a lattice vector (periodic), not a non-periodic jump', () => {
    const f = frame(2);
    const g = copy(f);
    // atom 2 shifted by the lattice vector b = (0.3, 6, 0)
    g.positions[6] += 0.3;
    g.positions[7] += 6;
    expect(structureDifference(f, g)).toBeNull();
    const fn = { ...copy(f), pbc: [true, false, true] as Frame['pbc'] };
    const gn = { ...copy(g), pbc: [true, false, true] as Frame['pbc'] };
    expect(structureDifference(fn, gn)).toMatch(/^atom 2 moved 6\.0075 Å/);
  });

  it('names a different atom count, species, pbc and cell', () => {
    const f = frame(3);
    const fewer = { ...copy(f), species: f.species.slice(0, 5), positions: f.positions.slice(0, 15) };
    expect(structureDifference(f, fewer)).toBe('5 atom(s), the frame sent has 6');
    const swapped = copy(f);
    swapped.species[1] = 'O';
    swapped.species[0] = 'H';
    expect(structureDifference(f, swapped)).toBe('atom 0 is H, in the frame sent it is O');
    const slab = { ...copy(f), pbc: [true, true, false] as Frame['pbc'] };
    expect(structureDifference(f, slab)).toBe('pbc "T T F", the frame sent has "T T T"');
    const strained = copy(f);
    strained.cell![3] += 0.01;
    expect(structureDifference(f, strained)).toBe('cell component bx differs by 0.0100 Å from the frame sent (tolerance 0.0001 Å)');
    expect(structureDifference(f, { ...copy(f), cell: null })).toBe('no cell (Lattice), the frame sent has one');
  });
});

describe('matchFrames', () => {
  const sent = [0, 1, 2, 3, 4].map(frame);

  it('passes the frames returned as sent', () => {
    expect(matchFrames(sent, sent.map(copy))).toBeNull();
  });

  it('catches frames returned in another order', () => {
    expect(matchFrames(sent, [...sent].reverse().map(copy))).toEqual({ kind: 'order', frame: 0, reason: 'frames returned in another order: frame 0 matches sent frame 4' });
  });

  it('catches a dropped frame and names it, and an extra one', () => {
    const dropped = sent.filter((_, k) => k !== 2).map(copy);
    expect(matchFrames(sent, dropped)).toEqual({ kind: 'count', frame: null, reason: 'returned 4 frame(s) for the 5 it was given: sent frame 2 is missing' });
    const extra = [...sent, sent[1]].map(copy);
    expect(matchFrames(sent, extra)).toEqual({ kind: 'count', frame: 5, reason: 'returned 6 frame(s) for the 5 it was given: frame 5 repeats sent frame 1' });
  });

  it('catches one atom of one frame moved by 0.1 Å', () => {
    const got = sent.map(copy);
    got[3].positions[3 * 5 + 2] -= 0.1;
    const p = matchFrames(sent, got)!;
    expect(p).toEqual({ kind: 'structure', frame: 3, reason: 'atom 5 moved 0.1000 Å from the frame sent (tolerance 0.0001 Å)' });
    // why it matters: the held-out choice is a hash of the structure, so the moved copy would draw its own
    // assignment; over many frames about half of the assignments (at holdout 0.5) differ.
    let differ = 0;
    for (let k = 0; k < 200; k++) {
      const f = frame(100 + k);
      const g = copy(f);
      g.positions[0] += 0.1;
      if (isHeldOut(f, 0.5) !== isHeldOut(g, 0.5)) differ++;
    }
    // binomial(200, 0.5): mean 100, standard deviation 7.1; 60..140 is more than 5 standard deviations
    expect(differ).toBeGreaterThan(60);
    expect(differ).toBeLessThan(140);
  });

  const py = '/usr/bin/python3';
  const hasAse = existsSync(py) && (() => {
    try {
      execFileSync(py, ['-c', 'import ase'], { stdio: 'ignore' });
      return true;
    } catch {
      return false;
    }
  })();

  it.skipIf(!hasAse)('accepts frames rewritten by ASE (8 decimals), which a labeler built on ASE returns', async () => {
    const path = join(dir, 'sent.xyz');
    const back = join(dir, 'ase.xyz');
    await writeFrames(path, sent);
    execFileSync(py, ['-c', 'import sys\nfrom ase.io import read, write\nwrite(sys.argv[2], read(sys.argv[1], index=":"), format="extxyz")', path, back]);
    const got: Frame[] = [];
    for await (const f of readFrames(back)) got.push(f);
    // the rewrite did change the numbers (rounded to 8 decimals), within the tolerance
    expect(Array.from(got[0].positions)).not.toEqual(Array.from(sent[0].positions));
    let worst = 0;
    got.forEach((g, k) => g.positions.forEach((x, i) => (worst = Math.max(worst, Math.abs(x - sent[k].positions[i])))));
    expect(worst).toBeLessThanOrEqual(5e-9 + 1e-15);
    expect(matchFrames(sent, got)).toBeNull();
  });
});
