/**
 * Start structures that cannot be simulated are refused before anything is planned (src/atoms/sanity.ts
 * through the campaign loader). Geometry facts: a cell's volume is |a . (b x c)| (any linear algebra text);
 * the Si-Si distance in diamond silicon is 2.3517 Å (a = 5.431 Å, design notes).
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { structureIssue } from '../../src/atoms/sanity.js';
import type { Frame, Pbc } from '../../src/atoms/frame.js';
import { loadCampaign, CampaignError } from '../../src/campaign/load.js';
import { campaignYaml, startXyz } from '../engine/fixture.js';

function frame(species: string[], positions: number[], cell: number[] | null, pbc: Pbc): Frame {
  return { species, positions: Float64Array.from(positions), cell: cell ? Float64Array.from(cell) : null, pbc, arrays: new Map(), info: new Map() };
}

const cube = [5, 0, 0, 0, 5, 0, 0, 0, 5];

describe('structureIssue', () => {
  it('accepts ordinary periodic, slab, wire and molecular structures', () => {
    expect(structureIssue(frame(['Si', 'Si'], [0, 0, 0, 1.3578, 1.3578, 1.3578], [0, 2.7155, 2.7155, 2.7155, 0, 2.7155, 2.7155, 2.7155, 0], [true, true, true]))).toBeNull();
    expect(structureIssue(frame(['Ar'], [0, 0, 0], [4, 0, 0, 0, 4, 0, 0, 0, 0], [true, true, false]))).toBeNull();
    expect(structureIssue(frame(['Ar'], [0, 0, 0], [4, 0, 0, 0, 0, 0, 0, 0, 0], [true, false, false]))).toBeNull();
    expect(structureIssue(frame(['O', 'H', 'H'], [0, 0, 0, 0.9572, 0, 0, -0.24, 0.9266, 0], null, [false, false, false]))).toBeNull();
  });
  it('names each kind of structure that cannot be simulated', () => {
    expect(structureIssue(frame([], [], cube, [true, true, true]))).toMatch(/0 atoms/);
    expect(structureIssue(frame(['Ar', 'Ar'], [0, 0, 0, NaN, 1, 1], cube, [true, true, true]))).toMatch(/atom 1 has a non-finite coordinate/);
    expect(structureIssue(frame(['Ar'], [0, 0, 0], [5, 0, 0, 0, 0, 0, 0, 0, 5], [true, true, true]))).toMatch(/lattice vector b is zero/);
    expect(structureIssue(frame(['Ar'], [0, 0, 0], [5, 0, 0, 0, 5, 0, 5, 5, 0], [true, true, true]))).toMatch(/zero volume/);
    expect(structureIssue(frame(['Ar'], [0, 0, 0], [5, 0, 0, 10, 0, 0, 0, 0, 5], [true, true, false]))).toMatch(/parallel/);
    expect(structureIssue(frame(['Ar'], [0, 0, 0], null, [true, true, true]))).toMatch(/no Lattice/);
    expect(structureIssue(frame(['Ar', 'Ar', 'Ar'], [1, 1, 1, 1, 1, 1, 1, 1, 1], cube, [true, true, true]))).toMatch(/all 3 atoms are at one point/);
  });
});

describe('the campaign loader refuses such start files, naming file, frame and key', () => {
  const root = mkdtempSync(join(tmpdir(), 'ratchet-sanity-'));
  afterAll(() => rmSync(root, { recursive: true, force: true }));
  const cases: [string, string, RegExp][] = [
    ['zero atoms', `0\nLattice="5 0 0 0 5 0 0 0 5" Properties=species:S:1:pos:R:3 pbc="T T T"\n`, /frame 0 of "start.xyz": it has 0 atoms/],
    ['NaN coordinate', startXyz(2).replace(/\nAr ([-0-9.]+) /, '\nAr nan '), /frame 0 of "start.xyz": atom 0 has a non-finite coordinate/],
    ['zero-volume cell', startXyz(1).replace(/Lattice="[^"]*"/, 'Lattice="5.26 0 0 0 0 0 0 0 5.26"'), /lattice vector b is zero/],
    ['all atoms at one point', `2\nLattice="5 0 0 0 5 0 0 0 5" Properties=species:S:1:pos:R:3 pbc="T T T"\nAr 1 1 1\nAr 1 1 1\n`, /all 2 atoms are at one point/],
    ['a close contact', `2\nLattice="9 0 0 0 9 0 0 0 9" Properties=species:S:1:pos:R:3 pbc="T T T"\nAr 1 1 1\nAr 1.5 1 1\n`, /atoms 0 and 1 \(Ar-Ar\) 0\.5000 Å apart, below/],
  ];
  for (const [name, xyz, re] of cases) {
    it(name, async () => {
      const dir = mkdtempSync(join(root, 'c-'));
      writeFileSync(join(dir, 'start.xyz'), xyz);
      writeFileSync(join(dir, 'campaign.yaml'), campaignYaml());
      const err = await loadCampaign(join(dir, 'campaign.yaml')).then(
        () => null,
        (e: unknown) => e,
      );
      expect(err).toBeInstanceOf(CampaignError);
      const e = err as CampaignError;
      expect(e.keyPath).toBe('start');
      expect(e.file).toBe(join(dir, 'campaign.yaml'));
      expect(e.line).toBeGreaterThan(0);
      expect(e.message).toMatch(re);
    });
  }
});
