/**
 * contacts: a failure names its violating pair. The closest pair of a frame (min_distance) can be a bonded pair well
 * within its limit while another species pair violates; the failure then names the violation that is furthest below
 * its limit (smallest distance / limit; ties: earliest frame, then lowest i, j), in the reasons and as
 * figures.worst_violation. Checked against a brute-force enumeration of all pairs (independent of the cell list) with
 * the Cordero et al. 2008 radii written out here (H 0.31, O 0.66, Si 1.11 Å).
 */
import { describe, expect, it } from 'vitest';
import { contactsFrame, summarizeContacts } from '../../src/gates/contacts.js';
import { formatContacts } from '../../src/gates/format.js';
import { bruteForcePairs } from '../atoms/geometry-helpers.js';
import { lcg, makeFrame } from './helpers.js';
import type { Frame } from '../../src/atoms/frame.js';

const judge = (frames: Frame[], opts = {}) => summarizeContacts(frames.map((f, k) => contactsFrame(f, k, opts)), opts);

describe('contacts: the pair a failure names', () => {
  it('a bonded O-H closer than a violating Si-Si: the failure names Si-Si, min_distance stays O-H', () => {
    // O-H 0.96 Å (limit 0.7 x 0.97 = 0.679 Å: fine); Si-Si 1.0 Å (limit 0.5 x 2.22 = 1.11 Å: violates)
    const f = makeFrame({ species: ['O', 'H', 'Si', 'Si'], positions: [0, 0, 0, 0.96, 0, 0, 10, 0, 0, 11, 0, 0] });
    const res = judge([f]);
    expect(res.verdict).toBe('fail');
    expect(res.figures.min_distance).toMatchObject({ value: 0.96, i: 0, j: 1, species: ['O', 'H'] });
    expect(res.figures.worst_violation).toMatchObject({ frame: 0, i: 2, j: 3, species: ['Si', 'Si'], distance: 1 });
    expect(res.figures.worst_violation!.limit).toBeCloseTo(1.11, 12);
    expect(res.reasons).toEqual([
      '1 pair(s) in 1 frame(s) are closer than their limit; the first frame with one is frame 0, e.g. atoms 2 and 3 (Si-Si) at 1 Å, limit 1.11 Å',
      'most severe violation: 1 Å between atoms 2 and 3 (Si-Si) in frame 0, limit 1.11 Å (0.901 of the limit)',
    ]);
    expect(res.reasons.join(' ')).not.toContain('O-H');
    const text = formatContacts(res);
    expect(text).toMatch(/most severe\s+1\.0000 Å, atoms 2 and 3 \(Si-Si\), frame 0, limit 1\.1100 Å/);
  });

  it('furthest below its limit, not shortest: Si-Si at 0.9 Å (0.81 of 1.11) over H-H at 0.40 Å (0.92 of 0.434)', () => {
    const f = makeFrame({ species: ['H', 'H', 'Si', 'Si'], positions: [0, 0, 0, 0.4, 0, 0, 10, 0, 0, 10.9, 0, 0] });
    const res = judge([f]);
    expect(res.figures.violation_count).toBe(2);
    expect(res.figures.min_distance).toMatchObject({ i: 0, j: 1, species: ['H', 'H'] });
    expect(res.figures.worst_violation).toMatchObject({ i: 2, j: 3, species: ['Si', 'Si'] });
    expect(res.figures.worst_violation!.ratio).toBeCloseTo(0.9 / 1.11, 12);
  });

  it('across frames: first violation, most severe violation and closest pair can be three different frames', () => {
    const frame = (si: number, hh: number) => makeFrame({ species: ['H', 'H', 'Si', 'Si'], positions: [0, 0, 0, hh, 0, 0, 10, 0, 0, 10 + si, 0, 0] });
    // frame 0: Si-Si 1.05 (mild); frame 1: H-H 0.74 (closest of all, no violation); frame 2: Si-Si 0.8 (worst); frame 3: as 2
    const res = judge([frame(1.05, 0.8), frame(2.3, 0.74), frame(0.8, 0.8), frame(0.8, 0.8)]);
    expect(res.figures.first_violation_frame).toBe(0);
    expect(res.figures.min_distance).toMatchObject({ value: 0.74, frame: 1, species: ['H', 'H'] });
    expect(res.figures.worst_violation).toMatchObject({ frame: 2, i: 2, j: 3, species: ['Si', 'Si'] }); // tie with 3: earliest
    expect(res.reasons[0]).toContain('the first frame with one is frame 0, e.g. atoms 2 and 3 (Si-Si) at 1.05 Å');
    expect(res.reasons[1]).toMatch(/^most severe violation: 0\.8 Å between atoms 2 and 3 \(Si-Si\) in frame 2/);
  });

  it('random H/O/Si frames: the named pair is the brute-force minimum of distance / limit', () => {
    const radius: Record<string, number> = { H: 0.31, O: 0.66, Si: 1.11 };
    const limitOf = (a: string, b: string) => (a === 'H' || b === 'H' ? 0.7 : 0.5) * (radius[a] + radius[b]);
    const r = lcg(7);
    const cell = [5, 0, 0, 0.8, 5.2, 0, -0.6, 0.4, 5.4];
    const frames = Array.from({ length: 6 }, () => {
      const species = Array.from({ length: 24 }, (_, k) => ['H', 'O', 'Si'][k % 3]);
      const positions: number[] = [];
      for (let a = 0; a < 24; a++) {
        const s = [r(), r(), r()];
        for (let c = 0; c < 3; c++) positions.push(s[0] * cell[c] + s[1] * cell[3 + c] + s[2] * cell[6 + c]);
      }
      return makeFrame({ species, positions, cell });
    });
    let best: { frame: number; i: number; j: number; ratio: number } | null = null;
    frames.forEach((f, k) => {
      for (const p of bruteForcePairs(f.positions, f.cell, f.pbc, 2.5)) {
        const ratio = p.d / limitOf(f.species[p.i], f.species[p.j]);
        if (ratio < 1 && (best === null || ratio < best.ratio)) best = { frame: k, i: p.i, j: p.j, ratio };
      }
    });
    expect(best).not.toBeNull();
    const res = judge(frames, { maxPerFrame: 1 });
    const b = best as unknown as { frame: number; i: number; j: number; ratio: number };
    expect(res.figures.worst_violation).toMatchObject({ frame: b.frame, i: b.i, j: b.j });
    expect(res.figures.worst_violation!.ratio).toBeCloseTo(b.ratio, 12);
  });

  it('no violation: no worst_violation, and the note names the closest pair within its limit', () => {
    const res = judge([makeFrame({ species: ['O', 'H'], positions: [0, 0, 0, 0.96, 0, 0] })]);
    expect(res.verdict).toBe('pass');
    expect(res.figures.worst_violation).toBeNull();
    expect(res.reasons).toEqual(['every pair is at or beyond its limit; closest: 0.96 Å between atoms 0 and 1 (O-H) in frame 0, limit 0.679 Å']);
  });
});
