/**
 * A small seeded pseudo-random number generator, so every stage program is reproducible from its seed.
 *
 * xoshiro128** (D. Blackman and S. Vigna, "Scrambled linear pseudorandom number generators",
 * ACM Trans. Math. Softw. 47 (2021) 36; from memory), seeded through splitmix32 so that nearby
 * seeds give unrelated streams. Normal deviates by the Box–Muller transform
 * (G. E. P. Box and M. E. Muller, Ann. Math. Statist. 29 (1958) 610).
 */

import { createHash } from 'node:crypto';

export interface Random {
  /** Uniform in [0, 1). */
  uniform(): number;
  /** Standard normal (mean 0, variance 1). */
  normal(): number;
  /** Uniform integer in [0, n). */
  integer(n: number): number;
}

function splitmix32(seed: number): () => number {
  let s = seed >>> 0;
  return () => {
    s = (s + 0x9e3779b9) >>> 0;
    let z = s;
    z = Math.imul(z ^ (z >>> 16), 0x85ebca6b) >>> 0;
    z = Math.imul(z ^ (z >>> 13), 0xc2b2ae35) >>> 0;
    return (z ^ (z >>> 16)) >>> 0;
  };
}

/** A generator for an integer seed (any safe integer; the high and low 32 bits are both used). */
export function createRandom(seed: number): Random {
  if (!Number.isSafeInteger(seed)) throw new RangeError(`seed must be a safe integer, got ${seed}`);
  const hi = Math.floor(seed / 2 ** 32) >>> 0;
  const mix = splitmix32((seed >>> 0) ^ Math.imul(hi, 0x27d4eb2d));
  const s = new Uint32Array([mix(), mix(), mix(), mix()]);
  if (s[0] === 0 && s[1] === 0 && s[2] === 0 && s[3] === 0) s[0] = 1;
  const next = (): number => {
    const r = Math.imul(rotl(Math.imul(s[1], 5), 7), 9) >>> 0;
    const t = (s[1] << 9) >>> 0;
    s[2] ^= s[0];
    s[3] ^= s[1];
    s[1] ^= s[2];
    s[0] ^= s[3];
    s[2] ^= t;
    s[3] = rotl(s[3], 11);
    return r;
  };
  let spare: number | null = null;
  const uniform = (): number => {
    // 53 random bits for a double in [0, 1)
    const a = next() >>> 5;
    const b = next() >>> 6;
    return (a * 67108864 + b) / 9007199254740992;
  };
  return {
    uniform,
    normal(): number {
      if (spare !== null) {
        const v = spare;
        spare = null;
        return v;
      }
      let u = 0;
      while (u === 0) u = uniform();
      const v = uniform();
      const r = Math.sqrt(-2 * Math.log(u));
      spare = r * Math.sin(2 * Math.PI * v);
      return r * Math.cos(2 * Math.PI * v);
    },
    integer(n: number): number {
      return Math.floor(uniform() * n);
    },
  };
}

function rotl(x: number, k: number): number {
  return ((x << k) | (x >>> (32 - k))) >>> 0;
}

/**
 * A generator for any string or number seed (e.g. "perturb:0:17"): the seed's sha256 gives a safe
 * integer for createRandom, so composite seeds need no care about collisions.
 */
export function seededRandom(seed: string | number): Random {
  const h = createHash('sha256').update(String(seed)).digest();
  return createRandom(h.readUInt32BE(0) * 2 ** 21 + (h.readUInt32BE(4) >>> 11));
}
