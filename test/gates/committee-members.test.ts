/**
 * committee: every member forces_k, k < M, on every frame. A frame that lacks one (or carries one k >= M) fails the gate
 * naming the frame and the keys; it is never a warning, never skipped, and never miscounted (forces_0, forces_2, forces_3
 * is three arrays of a committee of four with forces_1 missing, not "1 array"). The member keys of the files written
 * here are cross-checked with Debian's ASE reader (an independent extended XYZ reader).
 */
import { describe, expect, it, beforeAll, afterAll } from 'vitest';
import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { writeFrames } from '../../src/atoms/xyz/writer.js';
import { checkCommittee, committeeFrame, committeeMembers, memberGaps, summarizeCommittee } from '../../src/gates/committee.js';
import { makeFrame } from './helpers.js';

/** One H atom with member arrays at the given indices; member k's force is (s_k, 0, 0). */
const frameWith = (members: number[], s = (k: number) => 0.01 * k) =>
  makeFrame({
    species: ['H'],
    positions: [0, 0, 0],
    info: { energy: -1 },
    arrays: Object.fromEntries(members.map((k) => [`forces_${k}`, [s(k), 0, 0]])),
  });
const judge = (frames: ReturnType<typeof frameWith>[], opts = {}) => summarizeCommittee(frames.map((f, k) => committeeFrame(f, k, opts)), opts);

let dir: string;
beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'ratchet-committee-members-'));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));
const at = (name: string) => join(dir, name);

/** Member keys per frame as ASE reads them (null when ASE is missing: the cross-check is then skipped with a message). */
function aseMembers(path: string): string[][] | null {
  try {
    const out = execFileSync(
      '/usr/bin/python3',
      ['-c', `import json, sys, ase.io\nprint(json.dumps([sorted(k for k in a.arrays if k.startswith('forces_')) for a in ase.io.read(sys.argv[1], ':')]))`, path],
      { encoding: 'utf8' },
    );
    return JSON.parse(out) as string[][];
  } catch (err) {
    console.warn(`ASE cross-check skipped: /usr/bin/python3 with ase could not read ${path} (${(err as Error).message.split('\n')[0]})`);
    return null;
  }
}

describe('committee members, frame by frame', () => {
  it('forces_0, forces_2, forces_3: three arrays of a committee of four, forces_1 missing', () => {
    const f = frameWith([0, 2, 3]);
    expect(committeeMembers(f)).toEqual([0, 2, 3]);
    const s = committeeFrame(f, 0);
    expect(s).toMatchObject({ models: 4, members: [0, 2, 3], absent: ['forces_1'], extra: [] });
    const res = judge([f]);
    expect(res.verdict).toBe('fail');
    expect(res.figures.models).toBe(4);
    expect(res.reasons[0]).toBe(
      "1 of 1 frame(s) do not carry exactly the committee's 4 force arrays; the first is frame 0 with 3 committee force array(s) (forces_0, forces_2, forces_3) for 4 models (forces_0 ... forces_3): forces_1 missing",
    );
    expect(res.reasons.join(' ')).not.toMatch(/\b1 (committee force )?array\b/);
    expect(res.figures.incomplete).toEqual([{ frame: 0, present: ['forces_0', 'forces_2', 'forces_3'], missing: ['forces_1'], extra: [] }]);
  });

  it('a member missing on a later frame fails naming that frame and key, even when every judged frame is confident', () => {
    // spreads of the complete frames: members at 0, 0.01, 0.02, 0.03 eV/Å: far below the 0.05 eV/Å lower edge
    const frames = [frameWith([0, 1, 2, 3]), frameWith([0, 1, 2, 3]), frameWith([0, 2, 3]), frameWith([0, 1, 2, 3])];
    const res = judge(frames);
    expect(res.verdict).toBe('fail');
    expect(res.figures.incomplete_frames).toBe(1);
    expect(res.figures.first_incomplete_frame).toBe(2);
    expect(res.reasons[0]).toContain('the first is frame 2 with 3 committee force array(s) (forces_0, forces_2, forces_3) for 4 models');
    expect(res.reasons[0]).toContain('forces_1 missing');
    // the incomplete frame gets no spread and is counted runaway, never confident
    expect(res.figures.max_spread[2]).toBeNull();
    expect(res.figures.band).toEqual(['confident', 'confident', 'runaway', 'confident']);
    expect(res.figures.max_spread[0]).toBeGreaterThan(0);
  });

  it('with M given: missing and unexpected members both fail, each named', () => {
    const frames = [frameWith([0, 1, 2]), frameWith([0, 1, 2, 3]), frameWith([1, 2])];
    const res = judge(frames, { models: 3 });
    expect(res.verdict).toBe('fail');
    expect(res.figures.incomplete).toEqual([
      { frame: 1, present: ['forces_0', 'forces_1', 'forces_2', 'forces_3'], missing: [], extra: ['forces_3'] },
      { frame: 2, present: ['forces_1', 'forces_2'], missing: ['forces_0'], extra: [] },
    ]);
    expect(res.reasons[0]).toContain('frame 1 with 4 committee force array(s) (forces_0, forces_1, forces_2, forces_3) for 3 models (forces_0 ... forces_2): forces_3 unexpected');
    expect(memberGaps([0, 5], 3)).toEqual({ absent: ['forces_1', 'forces_2'], extra: ['forces_5'] });
    // names that are not members: forces, forces_01, forces_x
    const odd = makeFrame({ species: ['H'], positions: [0, 0, 0], arrays: { forces: [0, 0, 0], forces_01: [0, 0, 0], forces_x: [0, 0, 0], forces_1: [0, 0, 0] } });
    expect(committeeMembers(odd)).toEqual([1]);
  });

  it('files: the check (and the simulate stage, which passes models: the committee size) names frame, file and keys', async () => {
    const frames = [frameWith([0, 1, 2, 3]), frameWith([0, 1, 2, 3, 4]), frameWith([0, 2, 3]), frameWith([0, 1, 2, 3])];
    await writeFrames(at('traj.xyz'), frames);
    const theirs = aseMembers(at('traj.xyz'));
    if (theirs !== null)
      expect(theirs).toEqual([
        ['forces_0', 'forces_1', 'forces_2', 'forces_3'],
        ['forces_0', 'forces_1', 'forces_2', 'forces_3', 'forces_4'],
        ['forces_0', 'forces_2', 'forces_3'],
        ['forces_0', 'forces_1', 'forces_2', 'forces_3'],
      ]);
    for (const workers of [0, 2]) {
      const res = await checkCommittee([at('traj.xyz')], { models: 4, maxRunawayFraction: 1, workers });
      expect(res.verdict).toBe('fail');
      expect(res.figures.models).toBe(4);
      expect(res.figures.incomplete).toEqual([
        { frame: 1, present: ['forces_0', 'forces_1', 'forces_2', 'forces_3', 'forces_4'], missing: [], extra: ['forces_4'] },
        { frame: 2, present: ['forces_0', 'forces_2', 'forces_3'], missing: ['forces_1'], extra: [] },
      ]);
      expect(res.reasons[0]).toBe(
        `2 of 4 frame(s) do not carry exactly the committee's 4 force arrays; the first is frame 1 of ${at('traj.xyz')} with ` +
          '5 committee force array(s) (forces_0, forces_1, forces_2, forces_3, forces_4) for 4 models (forces_0 ... forces_3): forces_4 unexpected',
      );
      expect(res.figures.band).toEqual(['confident', 'runaway', 'runaway', 'confident']);
    }
    // without --models, M comes from the first frame with a gap in it: 4 (forces_1 missing), never "1 array"
    await writeFrames(at('gap.xyz'), [frameWith([0, 2, 3]), frameWith([0, 1, 2, 3])]);
    const gap = await checkCommittee([at('gap.xyz')], { workers: 0 });
    expect(gap.verdict).toBe('fail');
    expect(gap.figures.models).toBe(4);
    expect(gap.reasons[0]).toContain(`frame 0 of ${at('gap.xyz')} with 3 committee force array(s) (forces_0, forces_2, forces_3) for 4 models (forces_0 ... forces_3): forces_1 missing`);
  });
});
