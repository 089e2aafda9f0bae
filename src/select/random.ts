import { createHash } from 'node:crypto';

/**
 * A small seeded generator (sfc32, from the PractRand test suite's small fast counter family),
 * seeded from any string or number through sha256, so a campaign's random choices are repeatable.
 */
export interface Random {
  /** Uniform in [0, 1). */
  next(): number;
  /** Standard normal (Box–Muller). */
  normal(): number;
  /** Integer in [0, n). */
  int(n: number): number;
}

export function seededRandom(seed: string | number): Random {
  const h = createHash('sha256').update(String(seed)).digest();
  let a = h.readUInt32LE(0);
  let b = h.readUInt32LE(4);
  let c = h.readUInt32LE(8);
  let d = h.readUInt32LE(12);
  const next = (): number => {
    a >>>= 0; b >>>= 0; c >>>= 0; d >>>= 0;
    let t = (a + b) | 0;
    a = b ^ (b >>> 9);
    b = (c + (c << 3)) | 0;
    c = (c << 21) | (c >>> 11);
    d = (d + 1) | 0;
    t = (t + d) | 0;
    c = (c + t) | 0;
    return (t >>> 0) / 4294967296;
  };
  for (let i = 0; i < 12; i++) next();
  let spare: number | undefined;
  return {
    next,
    normal() {
      if (spare !== undefined) {
        const s = spare;
        spare = undefined;
        return s;
      }
      let u = 0;
      while (u === 0) u = next();
      const v = next();
      const r = Math.sqrt(-2 * Math.log(u));
      spare = r * Math.sin(2 * Math.PI * v);
      return r * Math.cos(2 * Math.PI * v);
    },
    int(n: number) {
      return Math.floor(next() * n);
    },
  };
}
