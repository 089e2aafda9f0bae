/** Test helpers for the gates: build Frames directly, run ASE as an independent cross-check. */
import { execFileSync } from 'node:child_process';
import type { AtomColumn, Frame, InfoValue, Pbc } from '../../src/atoms/frame.js';

export interface FrameSpec {
  species: string[];
  positions: number[];
  cell?: number[] | null;
  pbc?: Pbc;
  /** Real per-atom arrays, width 3 unless given as [values, width]. */
  arrays?: Record<string, number[] | [number[], number]>;
  info?: Record<string, InfoValue>;
}

export function makeFrame(spec: FrameSpec): Frame {
  const arrays = new Map<string, AtomColumn>();
  for (const [name, v] of Object.entries(spec.arrays ?? {})) {
    const [values, width] = Array.isArray(v[0]) ? (v as [number[], number]) : [v as number[], 3];
    arrays.set(name, { type: 'R', width, values: Float64Array.from(values) });
  }
  return {
    species: spec.species,
    positions: Float64Array.from(spec.positions),
    cell: spec.cell ? Float64Array.from(spec.cell) : null,
    pbc: spec.pbc ?? (spec.cell ? [true, true, true] : [false, false, false]),
    arrays,
    info: new Map(Object.entries(spec.info ?? {})),
  };
}

/** A small deterministic pseudo-random generator (LCG, Numerical Recipes constants) for reproducible test data. */
export function lcg(seed: number): () => number {
  let s = seed >>> 0;
  return () => {
    s = (Math.imul(s, 1664525) + 1013904223) >>> 0;
    return s / 4294967296;
  };
}

/**
 * Run a Python snippet with Debian's ASE (/usr/bin/python3): it reads JSON from stdin as `data` and must print JSON.
 * Used only as an independent cross-check of structures these tests make.
 */
export function ase<T>(script: string, data: unknown): T {
  const out = execFileSync('/usr/bin/python3', ['-c', `import json, sys\ndata = json.load(sys.stdin)\n${script}`], {
    input: JSON.stringify(data),
    encoding: 'utf8',
  });
  return JSON.parse(out) as T;
}
