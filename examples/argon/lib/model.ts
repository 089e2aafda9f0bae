/**
 * The demo's machine-learned potential: a linear model on a radial basis.
 *
 * Per-atom energy E_i = c(s_i) + 1/2 sum_j sum_k w_{s_i s_j, k} g_k(r_ij), so the total energy is
 *   E = sum_i c(s_i) + sum over pairs sum_k w_{pair type, k} g_k(r_ij),
 * a pair potential expanded in the basis of basis.ts with a short cutoff (6 Å by default), plus a
 * constant per species. Linear in its parameters, so it is fitted by ridge regression (fit.ts).
 * A committee is M such models fitted with different seeds and resamples.
 */
import { z } from 'zod';
import { readFile, writeFile } from 'node:fs/promises';
import { forEachPair } from '../../../src/atoms/neighbours.js';
import { checkBasis, compileBasis, evalCompiled, type GaussianBasis } from './basis.js';
import type { PairSystem } from './lj.js';

export const MODEL_FORMAT = 'ratchet-demo-pair-model';

const basisSchema = z.object({
  kind: z.literal('gaussian'),
  centers: z.array(z.number()).min(1),
  width: z.number().positive(),
  r_on: z.number().nonnegative(),
  r_cut: z.number().positive(),
});

export const modelSchema = z.object({
  format: z.literal(MODEL_FORMAT),
  version: z.literal(1),
  species: z.array(z.string().min(1)).min(1),
  basis: basisSchema,
  pair_weights: z.record(z.string(), z.array(z.number())),
  species_energy: z.record(z.string(), z.number()),
  training: z.record(z.string(), z.unknown()).optional(),
});

export type PairModel = z.infer<typeof modelSchema> & { basis: GaussianBasis };

export class ModelError extends Error {
  constructor(
    readonly file: string,
    message: string,
  ) {
    super(`${file}: ${message}`);
    this.name = 'ModelError';
  }
}

/** Canonical key of an unordered species pair, e.g. "Ar-Ar", "C-H". */
export function pairKey(a: string, b: string): string {
  return a <= b ? `${a}-${b}` : `${b}-${a}`;
}

/** All unordered pairs of a sorted species list, in a fixed order. */
export function pairKeys(species: string[]): string[] {
  const keys: string[] = [];
  for (let a = 0; a < species.length; a++) for (let b = a; b < species.length; b++) keys.push(pairKey(species[a], species[b]));
  return keys;
}

/** Checks a parsed model for internal consistency; throws ModelError naming the key. */
export function validateModel(value: unknown, file: string): PairModel {
  const parsed = modelSchema.safeParse(value);
  if (!parsed.success) {
    const issue = parsed.error.issues[0];
    const where = issue.path.length ? issue.path.join('.') : '(top level)';
    throw new ModelError(file, `key ${where}: ${issue.message}`);
  }
  const m = parsed.data as PairModel;
  try {
    checkBasis(m.basis);
  } catch (e) {
    throw new ModelError(file, `key basis: ${(e as Error).message}`);
  }
  const k = m.basis.centers.length;
  for (const key of pairKeys([...m.species].sort())) {
    const w = m.pair_weights[key];
    if (!w) throw new ModelError(file, `key pair_weights: expected an entry "${key}"`);
    if (w.length !== k) throw new ModelError(file, `key pair_weights.${key}: expected ${k} weights (one per basis function), found ${w.length}`);
    if (!w.every(Number.isFinite)) throw new ModelError(file, `key pair_weights.${key}: expected finite numbers`);
  }
  for (const s of m.species) {
    if (!Number.isFinite(m.species_energy[s])) throw new ModelError(file, `key species_energy: expected a finite number for "${s}"`);
  }
  return m;
}

export async function loadModel(file: string): Promise<PairModel> {
  let text: string;
  try {
    text = await readFile(file, 'utf8');
  } catch (e) {
    throw new ModelError(file, `cannot read model file (${(e as NodeJS.ErrnoException).code ?? (e as Error).message})`);
  }
  let value: unknown;
  try {
    value = JSON.parse(text);
  } catch (e) {
    throw new ModelError(file, `expected a JSON model file: ${(e as Error).message}`);
  }
  return validateModel(value, file);
}

export async function saveModel(file: string, model: PairModel): Promise<void> {
  await writeFile(file, JSON.stringify(model, null, 1) + '\n');
}

export interface CommitteeResult {
  /** Potential energy of each member (eV). */
  energies: number[];
  /** Forces of each member, 3N each (eV/Å). */
  forces: Float64Array[];
  /** Shortest interatomic distance within the models' cutoff (Infinity if none). */
  minDistance: number;
}

/**
 * Energies and forces of every member on one configuration. The pairs within the largest cutoff are
 * found once (ratchet's neighbour search) and each member is evaluated on that list.
 */
export function evaluateCommittee(system: PairSystem, species: string[], models: PairModel[]): CommitteeResult {
  if (models.length === 0) throw new RangeError('a committee needs at least one model');
  const n = species.length;
  if (system.positions.length !== 3 * n) throw new RangeError(`positions hold ${system.positions.length / 3} atoms but species ${n}`);
  const modelSpecies = [...models[0].species].sort();
  for (const m of models) {
    const s = [...m.species].sort();
    if (s.join(',') !== modelSpecies.join(',')) throw new RangeError(`committee members know different species: ${modelSpecies.join(',')} vs ${s.join(',')}`);
  }
  const type = speciesIndex(species, modelSpecies);
  const pairs = collectPairs(system, Math.max(...models.map((m) => m.basis.r_cut)));
  const energies: number[] = [];
  const forces: Float64Array[] = [];
  for (const m of models) {
    const r = evaluateOnPairs(pairs, n, type, modelSpecies, m);
    energies.push(r.energy);
    forces.push(r.forces);
  }
  return { energies, forces, minDistance: pairs.minDistance };
}

/** Pairs within a cutoff, stored flat: i, j, d and (dx, dy, dz) = r_j + shift - r_i. */
export interface PairList {
  count: number;
  i: Int32Array;
  j: Int32Array;
  d: Float64Array;
  dx: Float64Array;
  dy: Float64Array;
  dz: Float64Array;
  minDistance: number;
}

export function collectPairs(system: PairSystem, cutoff: number): PairList {
  let cap = 256;
  let list: PairList = alloc(cap);
  let count = 0;
  let minDistance = Infinity;
  forEachPair(system, cutoff, (i, j, d, dx, dy, dz) => {
    if (d >= cutoff) return;
    if (count === cap) {
      const bigger = alloc((cap *= 2));
      bigger.i.set(list.i);
      bigger.j.set(list.j);
      bigger.d.set(list.d);
      bigger.dx.set(list.dx);
      bigger.dy.set(list.dy);
      bigger.dz.set(list.dz);
      list = bigger;
    }
    list.i[count] = i;
    list.j[count] = j;
    list.d[count] = d;
    list.dx[count] = dx;
    list.dy[count] = dy;
    list.dz[count] = dz;
    count++;
    if (d < minDistance) minDistance = d;
  });
  list.count = count;
  list.minDistance = minDistance;
  return list;
}

function alloc(cap: number): PairList {
  return {
    count: 0,
    i: new Int32Array(cap),
    j: new Int32Array(cap),
    d: new Float64Array(cap),
    dx: new Float64Array(cap),
    dy: new Float64Array(cap),
    dz: new Float64Array(cap),
    minDistance: Infinity,
  };
}

function evaluateOnPairs(pairs: PairList, n: number, type: Int32Array, modelSpecies: string[], model: PairModel): { energy: number; forces: Float64Array } {
  const basis = compileBasis(model.basis);
  const K = basis.K;
  const T = modelSpecies.length;
  const weights: Float64Array[] = [];
  for (let ta = 0; ta < T; ta++) for (let tb = 0; tb < T; tb++) weights.push(Float64Array.from(model.pair_weights[pairKey(modelSpecies[ta], modelSpecies[tb])]));
  let energy = 0;
  for (let a = 0; a < n; a++) energy += model.species_energy[modelSpecies[type[a]]];
  const forces = new Float64Array(3 * n);
  const g = new Float64Array(K);
  const dg = new Float64Array(K);
  const rCut = basis.rCut;
  for (let p = 0; p < pairs.count; p++) {
    const d = pairs.d[p];
    if (d >= rCut) continue;
    const i = pairs.i[p];
    const j = pairs.j[p];
    evalCompiled(d, basis, g, dg);
    const w = weights[type[i] * T + type[j]];
    let u = 0;
    let du = 0;
    for (let k = 0; k < K; k++) {
      u += w[k] * g[k];
      du += w[k] * dg[k];
    }
    energy += u;
    if (i === j) continue;
    const f = du / d;
    const fx = f * pairs.dx[p], fy = f * pairs.dy[p], fz = f * pairs.dz[p];
    forces[3 * i] += fx;
    forces[3 * i + 1] += fy;
    forces[3 * i + 2] += fz;
    forces[3 * j] -= fx;
    forces[3 * j + 1] -= fy;
    forces[3 * j + 2] -= fz;
  }
  return { energy, forces };
}

/** One model: energy and forces. */
export function evaluateModel(system: PairSystem, species: string[], model: PairModel): { energy: number; forces: Float64Array; minDistance: number } {
  const r = evaluateCommittee(system, species, [model]);
  return { energy: r.energies[0], forces: r.forces[0], minDistance: r.minDistance };
}

/** The committee mean of energies and forces. */
export function committeeMean(r: CommitteeResult): { energy: number; forces: Float64Array } {
  const m = r.energies.length;
  const forces = new Float64Array(r.forces[0].length);
  for (const f of r.forces) for (let a = 0; a < f.length; a++) forces[a] += f[a];
  for (let a = 0; a < forces.length; a++) forces[a] /= m;
  return { energy: r.energies.reduce((s, e) => s + e, 0) / m, forces };
}

/** Maps each atom to its species index in the model and checks every species is known. */
export function speciesIndex(species: string[], modelSpecies: string[]): Int32Array {
  const lookup = new Map(modelSpecies.map((s, i) => [s, i]));
  const out = new Int32Array(species.length);
  for (let a = 0; a < species.length; a++) {
    const t = lookup.get(species[a]);
    if (t === undefined) throw new RangeError(`atom ${a} is ${species[a]}, which the model does not know (it knows ${modelSpecies.join(', ')})`);
    out[a] = t;
  }
  return out;
}
