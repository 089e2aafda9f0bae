/**
 * mapFrames' range-split mode (jobs with usesIndex: false, plain files, workers > 1): every thread reads byte ranges of
 * the file itself and guesses where the first frame of its range starts; a guess is accepted only where the ranges
 * before it really ended. Checked here against the sequential reader on the same files (not against stored numbers):
 * identical results in file order, and identical errors (file, line and message) for a broken frame in the second half,
 * a blank line between frames, a truncated last frame and a job that throws; also plain XYZ whose comment lines look
 * like atom counts (wrong guesses, parsed again), frames larger than a range, a missing final newline, gzip (not
 * split), and positions: false.
 */
import { gzipSync } from 'node:zlib';
import { describe, expect, it } from 'vitest';
import { XyzError } from '../../../src/atoms/xyz/errors.js';
import { lastMapStats, mapFrames, type FrameJob, type MapOptions } from '../../../src/atoms/xyz/map.js';
import { put, rng, tempDir } from './helpers.js';

const dir = tempDir('ratchet-range-');
const JOBS = new URL('./jobs.ts', import.meta.url).href;
const job: FrameJob = { module: JOBS, fn: 'summaryNoIndex', options: { scale: 2 }, columns: ['forces'], usesIndex: false };
/** Small ranges: many of them, and frames that span several. */
const RANGES: MapOptions = { workers: 2, rangeBytes: 16 * 1024, batchBytes: 16 * 1024 };

/** Extended XYZ frames of 1 to 400 atoms (up to ~60 kB, several ranges), about 1.2 MB. */
function extended(frames = 90, seed = 7): string {
  const r = rng(seed);
  const parts: string[] = [];
  for (let k = 0; k < frames; k++) {
    const n = k % 17 === 5 ? 400 : 1 + Math.floor(r() * 120);
    const lines = [`${n}`, `Lattice="20 0 0 0 20 0 0 0 20" Properties=species:S:1:pos:R:3:forces:R:3 energy=${(r() * -100).toFixed(6)} note="frame ${k}" pbc="T T T"`];
    for (let a = 0; a < n; a++) {
      const v = Array.from({ length: 6 }, () => ((r() - 0.5) * 20).toFixed(8));
      lines.push(`${a % 3 ? 'O' : 'H'}  ${v.join('   ')}`);
    }
    parts.push(lines.join('\n'));
  }
  return parts.join('\n') + '\n';
}

/** Plain XYZ whose comment lines are integers, so that a comment line can pass for an atom count. */
function plainTricky(frames = 2000, seed = 3): string {
  const r = rng(seed);
  const parts: string[] = [];
  for (let k = 0; k < frames; k++) {
    const n = 1 + Math.floor(r() * 4);
    const lines = [`${n}`, `${1 + Math.floor(r() * 4)}`];
    for (let a = 0; a < n; a++) lines.push(`Ar ${(r() * 10).toFixed(6)} ${(r() * 10).toFixed(6)} ${(r() * 10).toFixed(6)}`);
    parts.push(lines.join('\n'));
  }
  return parts.join('\n') + '\n';
}

async function both<R>(path: string, j: FrameJob = job, opts: MapOptions = RANGES): Promise<{ seq: R[]; par: R[] }> {
  const seq = await mapFrames<R>(path, j, { workers: 1 });
  const par = await mapFrames<R>(path, j, opts);
  return { seq, par };
}

async function errorOf(p: Promise<unknown>): Promise<Error> {
  try {
    await p;
  } catch (err) {
    return err as Error;
  }
  throw new Error('expected an error');
}

/** The same error, thrown sequentially and in range-split mode. */
async function sameError(path: string, j: FrameJob = job): Promise<Error> {
  const seq = await errorOf(mapFrames(path, j, { workers: 1 }));
  const par = await errorOf(mapFrames(path, j, RANGES));
  expect(lastMapStats.mode).toBe('ranges');
  expect(par.constructor).toBe(seq.constructor);
  expect(par.message).toBe(seq.message);
  if (seq instanceof XyzError) {
    expect((par as XyzError).line).toBe(seq.line);
    expect((par as XyzError).file).toBe(seq.file);
  }
  return seq;
}

const text = extended();
const plain = put(dir, 'traj.xyz', text);

describe('mapFrames in range-split mode', () => {
  it('gives the results of the sequential reader, in file order', async () => {
    const { seq, par } = await both(plain);
    expect(lastMapStats.mode).toBe('ranges');
    expect(lastMapStats.batches).toBeGreaterThan(30);
    // frames of 400 atoms span several ranges: some ranges hold no frame start
    expect(lastMapStats.empty).toBeGreaterThan(0);
    expect(seq.length).toBe(90);
    expect(par).toEqual(seq);
    // and with 3 threads and the default range size
    expect(await mapFrames(plain, job, { ...RANGES, workers: 3, rangeBytes: 40 * 1024 })).toEqual(seq);
    expect(await mapFrames(plain, job, { workers: 2, batchBytes: 16 * 1024 })).toEqual(seq);
    expect(lastMapStats.mode).toBe('ranges');
  });

  it('accepts a guessed start only where the ranges before it ended (plain XYZ with numeric comments)', async () => {
    const path = put(dir, 'plain.xyz', plainTricky());
    const { seq, par } = await both(path, job, { ...RANGES, rangeBytes: 512 });
    expect(lastMapStats.mode).toBe('ranges');
    // some guesses landed on a comment line that looks like an atom count, and were parsed again
    expect(lastMapStats.reparsed).toBeGreaterThan(0);
    expect(seq.length).toBe(2000);
    expect(par).toEqual(seq);
  });

  it('reads a file without a final newline and with blank lines at its end', async () => {
    const open = put(dir, 'open.xyz', text.slice(0, -1));
    const a = await both(open);
    expect(a.par).toEqual(a.seq);
    expect(a.seq.length).toBe(90);
    const blanks = put(dir, 'blanks.xyz', text + '\n   \n\n');
    const b = await both(blanks);
    expect(b.par).toEqual(b.seq);
    expect(b.seq.length).toBe(90);
  });

  it('reports a broken frame in the second half with the same file:line and message', async () => {
    const lines = text.split('\n');
    const target = lines.findIndex((l, i) => i > lines.length * 0.7 && l.startsWith('O '));
    lines[target] = lines[target].replace(/^O\s+(\S+)/, 'O 1.2.3');
    const bad = put(dir, 'bad.xyz', lines.join('\n'));
    const err = await sameError(bad);
    expect((err as XyzError).line).toBe(target + 1);
    expect(err.message).toMatch(/column 2 \(pos, component 1 of 3\): expected a real number, found "1\.2\.3"$/);
    // two broken frames: the first in file order wins
    const early = lines.findIndex((l, i) => i > lines.length * 0.4 && l.startsWith('H '));
    lines[early] = lines[early] + ' 7';
    const two = put(dir, 'two-bad.xyz', lines.join('\n'));
    expect((await sameError(two)) as XyzError).toMatchObject({ line: early + 1 });
  });

  it('reports a bad atom count, a blank line between frames and a truncated last frame as the sequential reader does', async () => {
    const lines = text.split('\n');
    const counts: number[] = [];
    for (let i = 0; i < lines.length - 1; ) {
      counts.push(i);
      i += Number(lines[i]) + 2;
    }
    const k = counts[Math.floor(counts.length * 0.75)];
    const natoms = [...lines];
    natoms[k] = `${natoms[k]}x`;
    expect((await sameError(put(dir, 'natoms.xyz', natoms.join('\n')))).message).toMatch(/expected the atom count of frame \d+/);
    const blank = [...lines];
    blank.splice(k, 0, '');
    expect((await sameError(put(dir, 'blank.xyz', blank.join('\n')))).message).toMatch(/found a blank line/);
    const err = await sameError(put(dir, 'cut.xyz', text.slice(0, text.length - 500)));
    expect(err.message).toMatch(/file ends after \d+ of \d+ atom lines of frame 89 \(starting at line \d+\)/);
  });

  it('surfaces an error thrown by the job as the sequential path does', async () => {
    const failing: FrameJob = { module: JOBS, fn: 'failOnAtoms', options: { atoms: 400 }, usesIndex: false };
    expect((await sameError(plain, failing)).message).toBe('job refused a frame of 400 atoms');
  });

  it('does not split gzip files, and skips positions when asked', async () => {
    const gz = put(dir, 'traj.xyz.gz', gzipSync(Buffer.from(text)));
    const seq = await mapFrames(plain, job, { workers: 1 });
    expect(await mapFrames(gz, job, { workers: 2, batchBytes: 16 * 1024 })).toEqual(seq);
    expect(lastMapStats.mode).toBe('parallel');
    const noPos = await mapFrames<{ positions: number; sumForces: number; natoms: number }>(plain, { ...job, positions: false }, RANGES);
    expect(lastMapStats.mode).toBe('ranges');
    expect(noPos.map((s) => s.positions)).toEqual(seq.map(() => 0));
    expect(noPos.map((s) => [s.natoms, s.sumForces])).toEqual(seq.map((s) => [(s as { natoms: number }).natoms, (s as { sumForces: number }).sumForces]));
    // the sequential reader too
    expect(await mapFrames(plain, { ...job, positions: false }, { workers: 1 })).toEqual(noPos);
    // a missing pos column is still an error when positions are not parsed
    const lines = text.split('\n');
    const target = lines.findIndex((l, i) => i > lines.length * 0.6 && l.startsWith('O '));
    lines[target] = lines[target].split(/\s+/).slice(0, 5).join(' ');
    expect((await sameError(put(dir, 'short.xyz', lines.join('\n')), { ...job, positions: false })).message).toMatch(/expected 7 columns .*found 5$/);
  });
});
