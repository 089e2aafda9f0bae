/**
 * The starter campaign written by `ratchet init`: it loads as written, documents every section, and its
 * starting structure is a silicon diamond cell that an independent library reads correctly.
 * Cross-check: Debian's python3-ase (ase.io.read, extended XYZ) reads the structure we wrote; the
 * expected geometry is from the design notes: silicon a = 5.431 Å, Si-Si 2.3517 Å (= a·√3/4), 8 atoms
 * in the conventional diamond cell, 4 nearest neighbours each.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync, existsSync, mkdirSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { loadCampaign } from '../../src/campaign/load.js';
import { campaignJsonSchema } from '../../src/campaign/jsonschema.js';
import { InitError, STARTER_CAMPAIGN, writeStarter } from '../../src/campaign/starter.js';

let root: string;
beforeAll(() => {
  root = mkdtempSync(join(tmpdir(), 'ratchet-starter-'));
});
afterAll(() => {
  rmSync(root, { recursive: true, force: true });
});

describe('writeStarter', () => {
  it('writes a campaign that loads, into a directory it creates', async () => {
    const dir = join(root, 'new', 'campaign');
    const written = await writeStarter(dir);
    expect(written).toEqual({ campaign: join(dir, 'campaign.yaml'), structure: join(dir, 'start.xyz') });
    const loaded = await loadCampaign(written.campaign);
    expect(loaded.campaign.species).toEqual(['Si']);
    expect(loaded.campaign.start).toEqual(['start.xyz']);
    expect(loaded.campaign.conditions.map((c) => c.name)).toEqual(['solid-300K', 'hot-1200K']);
    expect(loaded.campaign.stages.label.resources).toMatchObject({ cpus: 4, memory: 4096, walltime: 7200 });
  });

  it('mentions every key of every section (as a setting or a comment)', () => {
    const missing: string[] = [];
    const visit = (node: any, path: string) => {
      for (const [key, child] of Object.entries((node.properties ?? {}) as Record<string, any>)) {
        if (key !== 'description' && !new RegExp(`^[\\s#-]*${key}:`, 'm').test(STARTER_CAMPAIGN)) missing.push(`${path}${key}`);
        visit(child, `${path}${key}.`);
        if (child.items) visit(child.items, `${path}${key}[].`);
      }
    };
    visit(campaignJsonSchema(), '');
    expect(missing).toEqual([]);
  });

  it('refuses to overwrite, writing nothing', async () => {
    const dir = join(root, 'existing');
    mkdirSync(dir);
    writeFileSync(join(dir, 'campaign.yaml'), 'name: mine\n');
    await expect(writeStarter(dir)).rejects.toThrow(InitError);
    await expect(writeStarter(dir)).rejects.toThrow(`${join(dir, 'campaign.yaml')}: already exists; not overwriting it (choose another directory or move the file)`);
    expect(readFileSync(join(dir, 'campaign.yaml'), 'utf8')).toBe('name: mine\n');
    expect(existsSync(join(dir, 'start.xyz'))).toBe(false);

    const dir2 = join(root, 'existing2');
    mkdirSync(dir2);
    writeFileSync(join(dir2, 'start.xyz'), 'mine');
    await expect(writeStarter(dir2)).rejects.toThrow(`${join(dir2, 'start.xyz')}: already exists`);
    expect(existsSync(join(dir2, 'campaign.yaml'))).toBe(false);
  });

  it('writes a silicon diamond cell that ASE reads with the expected geometry', async () => {
    const dir = join(root, 'ase');
    const { structure } = await writeStarter(dir);
    const script = `
import sys, json
from ase.io import read
from ase.neighborlist import neighbor_list
a = read(sys.argv[1], format='extxyz')
i, d = neighbor_list('id', a, 2.6)
print(json.dumps({"symbols": a.get_chemical_symbols(), "pbc": a.pbc.tolist(), "volume": a.get_volume(),
                  "dmin": float(d.min()), "dmax": float(d.max()), "counts": [int((i == k).sum()) for k in range(len(a))]}))
`;
    const out = JSON.parse(execFileSync('/usr/bin/python3', ['-c', script, structure], { encoding: 'utf8' }));
    expect(out.symbols).toEqual(Array(8).fill('Si'));
    expect(out.pbc).toEqual([true, true, true]);
    expect(out.volume).toBeCloseTo(5.431 ** 3, 6);
    expect(out.dmin).toBeCloseTo(2.3517, 4); // design notes: Si-Si 2.3517 Å
    expect(out.dmax).toBeCloseTo(2.3517, 4);
    expect(out.counts).toEqual(Array(8).fill(4)); // tetrahedral: 4 neighbours each
  });
});
