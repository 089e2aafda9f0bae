/**
 * Loading a committee and turning it into a force provider for the integrator.
 */
import { readdir, stat } from 'node:fs/promises';
import { join } from 'node:path';
import type { Pbc } from '../../../src/atoms/frame.js';
import type { ForceResult } from './dynamics.js';
import { ModelError, committeeMean, evaluateCommittee, loadModel, type CommitteeResult, type PairModel } from './model.js';

/** Model files from paths that are files or directories (a directory contributes its *.json files in natural order). */
export async function modelFiles(paths: string[]): Promise<string[]> {
  const out: string[] = [];
  for (const p of paths) {
    let st;
    try {
      st = await stat(p);
    } catch (e) {
      throw new ModelError(p, `cannot read (${(e as NodeJS.ErrnoException).code ?? (e as Error).message})`);
    }
    if (st.isDirectory()) {
      const names = (await readdir(p)).filter((n) => n.endsWith('.json')).sort((a, b) => a.localeCompare(b, 'en', { numeric: true }));
      if (names.length === 0) throw new ModelError(p, 'expected model *.json files in this directory, found none');
      out.push(...names.map((n) => join(p, n)));
    } else out.push(p);
  }
  return out;
}

export async function loadCommittee(paths: string[]): Promise<{ files: string[]; models: PairModel[] }> {
  const files = await modelFiles(paths);
  if (files.length === 0) throw new ModelError('(committee)', 'no model files given');
  return { files, models: await Promise.all(files.map((f) => loadModel(f))) };
}

/** Which force drives the dynamics: the committee mean, or one member's. */
export type Drive = 'mean' | number;

export function parseDrive(text: string, members: number): Drive {
  if (text === 'mean') return 'mean';
  const m = Number(text);
  if (!Number.isInteger(m) || m < 0 || m >= members) throw new RangeError(`drive: expected 'mean' or a member index 0..${members - 1}, found '${text}'`);
  return m;
}

/**
 * A force provider driven by the committee (mean or one member); every member's energy and forces are
 * passed on in `extra`. Non-finite positions give a non-finite result (so the run stops) rather than an exception.
 */
export function committeeForces(models: PairModel[], species: string[], cell: Float64Array | null, pbc: Pbc, drive: Drive): (x: Float64Array) => ForceResult<CommitteeResult> {
  return (positions) => {
    for (let i = 0; i < positions.length; i++) {
      if (!Number.isFinite(positions[i])) {
        const nan = new Float64Array(positions.length).fill(NaN);
        return { energy: NaN, forces: nan, minDistance: NaN, extra: { energies: models.map(() => NaN), forces: models.map(() => nan), minDistance: NaN } };
      }
    }
    const c = evaluateCommittee({ positions, cell, pbc }, species, models);
    const driving = drive === 'mean' ? committeeMean(c) : { energy: c.energies[drive], forces: c.forces[drive] };
    return { energy: driving.energy, forces: driving.forces, minDistance: c.minDistance, extra: c };
  };
}
