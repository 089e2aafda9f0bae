/** Shared helpers of the extended XYZ tests. */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll } from 'vitest';
import type { Frame } from '../../../src/atoms/frame.js';
import { readFrames } from '../../../src/atoms/xyz/reader.js';

/** A temporary directory removed after the test file. */
export function tempDir(prefix = 'ratchet-xyz-'): string {
  const dir = mkdtempSync(join(tmpdir(), prefix));
  afterAll(() => rmSync(dir, { recursive: true, force: true }));
  return dir;
}

export async function readAll(path: string, columns?: string[]): Promise<Frame[]> {
  const out: Frame[] = [];
  for await (const f of readFrames(path, { columns })) out.push(f);
  return out;
}

/** Write text to dir/name and return the path. */
export function put(dir: string, name: string, text: string | Buffer): string {
  const path = join(dir, name);
  writeFileSync(path, text);
  return path;
}

/** A small seeded generator (mulberry32), so random tests are reproducible. */
export function rng(seed: number): () => number {
  let s = seed >>> 0;
  return () => {
    s = (s + 0x6d2b79f5) >>> 0;
    let t = s;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

/** Bitwise equality of two doubles (distinguishes -0 from 0; NaN equals NaN). */
export function sameDouble(a: number, b: number): boolean {
  return Object.is(a, b);
}
