/**
 * mapFrames: the worker-thread path gives exactly the results of the sequential path (same order, same
 * numbers), whether or not the calling thread shares the parsing, surfaces the same XyzError (file and
 * absolute line) as the sequential reader, keeps a bounded number of batches in flight, and reads gzip
 * (inflated on the calling thread, parsed in the workers).
 * Under vitest the sources are TypeScript, so workers load tsx; the built dist/ (when present) is
 * tested too, with a plain JavaScript job, which needs no loader.
 */
import { existsSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { gzipSync } from 'node:zlib';
import { describe, expect, it } from 'vitest';
import { XyzError } from '../../../src/atoms/xyz/errors.js';
import { lastMapStats, mapFrames, MAX_QUEUED, type FrameJob } from '../../../src/atoms/xyz/map.js';
import type { Summary } from './jobs.js';
import { put, rng, tempDir } from './helpers.js';

const dir = tempDir();
const JOBS = new URL('./jobs.ts', import.meta.url).href;
const BATCH = 64 * 1024;

/** About 1.5 MB of frames of varying size with forces and a committee array. */
function trajectory(frames = 120, seed = 1): string {
  const r = rng(seed);
  const parts: string[] = [];
  for (let k = 0; k < frames; k++) {
    const n = 20 + Math.floor(r() * 200);
    const lines = [`${n}`, `Lattice="20 0 0 0 20 0 0 0 20" Properties=species:S:1:pos:R:3:forces:R:3:forces_0:R:3 energy=${(r() * -100).toFixed(6)} pbc="T T T"`];
    for (let a = 0; a < n; a++) {
      const v = Array.from({ length: 9 }, () => ((r() - 0.5) * 20).toFixed(8));
      lines.push(`${a % 2 ? 'O' : 'H'} ${v.join(' ')}`);
    }
    parts.push(lines.join('\n'));
  }
  return parts.join('\n') + '\n';
}

const text = trajectory();
const plain = put(dir, 'traj.xyz', text);
const job: FrameJob = { module: JOBS, fn: 'summary', options: { scale: 3 }, columns: ['forces'] };

describe('mapFrames', () => {
  it('gives the same results in file order on 1 thread and on 2 and 3 workers', async () => {
    const seq = await mapFrames<Summary>(plain, job, { workers: 1 });
    expect(lastMapStats.mode).toBe('sequential');
    expect(seq.length).toBe(120);
    expect(seq.map((s) => s.index)).toEqual(Array.from({ length: 120 }, (_, k) => k));
    expect(seq[0].arrays).toEqual(['forces']);
    expect(seq[0].scale).toBe(3);
    for (const workers of [2, 3]) {
      for (const callerParses of [true, false]) {
        const par = await mapFrames<Summary>(plain, job, { workers, batchBytes: BATCH, callerParses });
        expect(lastMapStats.mode).toBe('parallel');
        expect(lastMapStats.batches).toBeGreaterThan(10);
        if (!callerParses) expect(lastMapStats.callerBatches).toBe(0);
        // backpressure: at most MAX_QUEUED batches per worker thread in flight
        expect(lastMapStats.maxInFlight).toBeLessThanOrEqual(MAX_QUEUED * (workers - 1));
        expect(lastMapStats.maxInFlight).toBeGreaterThan(0);
        expect(par).toEqual(seq);
      }
    }
  });

  it('parses only the requested columns in the workers too', async () => {
    const all = await mapFrames<Summary>(plain, { module: JOBS, fn: 'summary' }, { workers: 2, batchBytes: BATCH });
    expect(all[0].arrays).toEqual(['forces', 'forces_0']);
    const none = await mapFrames<Summary>(plain, { module: JOBS, fn: 'summary', columns: [] }, { workers: 2, batchBytes: BATCH });
    expect(none[0].arrays).toEqual([]);
    expect(none.map((s) => s.sumPos)).toEqual(all.map((s) => s.sumPos));
  });

  it('reads gzip in parallel with the same results', async () => {
    const gz = put(dir, 'traj.xyz.gz', gzipSync(Buffer.from(text)));
    const seq = await mapFrames<Summary>(plain, job, { workers: 1 });
    // the compressed file is small: a tiny batch size still splits it into many batches
    const par = await mapFrames<Summary>(gz, job, { workers: 2, batchBytes: 16 * 1024 });
    expect(lastMapStats.mode).toBe('parallel');
    expect(par).toEqual(seq);
  });

  it('reads small files on the calling thread', async () => {
    const small = put(dir, 'small.xyz', trajectory(3, 2));
    const out = await mapFrames<Summary>(small, job, { workers: 2 });
    expect(out.length).toBe(3);
    expect(lastMapStats.mode).toBe('sequential');
  });

  it('surfaces a parse error from a worker as the same XyzError as the sequential reader', async () => {
    const lines = text.split('\n');
    // corrupt a number deep in the file (frame boundaries are unaffected)
    const target = lines.findIndex((l, i) => i > lines.length * 0.6 && l.startsWith('O '));
    const tokens = lines[target].split(' ');
    tokens[4] = '1.2.3';
    lines[target] = tokens.join(' ');
    const bad = put(dir, 'bad.xyz', lines.join('\n'));
    const errors: XyzError[] = [];
    // sequential; parallel with the error parsed wherever it lands; parallel with every batch on a worker
    for (const [workers, callerParses] of [[1, true], [2, true], [2, false]] as const) {
      try {
        await mapFrames(bad, job, { workers, batchBytes: BATCH, callerParses });
        expect.fail('no error');
      } catch (err) {
        expect(err).toBeInstanceOf(XyzError);
        errors.push(err as XyzError);
      }
    }
    expect(errors[1].message).toBe(errors[0].message);
    expect(errors[2].message).toBe(errors[0].message);
    expect(errors[2].line).toBe(target + 1);
    expect(errors[2].file).toBe(bad);
    expect(errors[0].message).toMatch(/column 5 \(forces, component 1 of 3\): expected a real number, found "1\.2\.3"$/);
    // a column that is not requested is skipped unparsed (only its column count is checked)
    const skipped = await mapFrames<Summary>(bad, { ...job, columns: [] }, { workers: 2, batchBytes: BATCH });
    expect(skipped.length).toBe(120);
  });

  it('reports the first error in file order when several batches fail, and a truncated last frame', async () => {
    const lines = text.split('\n');
    const early = lines.findIndex((l, i) => i > lines.length * 0.3 && l.startsWith('H '));
    const late = lines.findIndex((l, i) => i > lines.length * 0.8 && l.startsWith('H '));
    lines[early] = lines[early].replace(/^H (\S+)/, 'H x$1');
    lines[late] = lines[late].replace(/^H (\S+)/, 'H y$1');
    const bad = put(dir, 'two-bad.xyz', lines.join('\n'));
    for (const callerParses of [true, false]) {
      await expect(mapFrames(bad, job, { workers: 3, batchBytes: BATCH, callerParses })).rejects.toThrow(`${bad}:${early + 1}: `);
    }
    const cut = put(dir, 'cut.xyz', text.slice(0, text.length - 300));
    const seqErr = await mapFrames(cut, job, { workers: 1 }).catch((e: Error) => e);
    const parErr = await mapFrames(cut, job, { workers: 2, batchBytes: BATCH }).catch((e: Error) => e);
    expect(parErr).toBeInstanceOf(XyzError);
    expect((parErr as Error).message).toBe((seqErr as Error).message);
    expect((parErr as Error).message).toMatch(/file ends after \d+ of \d+ atom lines of frame 119 \(starting at line \d+\)/);
  });

  it('surfaces errors thrown by the job and refuses a missing function', async () => {
    for (const [workers, callerParses] of [[1, true], [2, true], [2, false]] as const) {
      await expect(mapFrames(plain, { module: JOBS, fn: 'failOnFive' }, { workers, batchBytes: BATCH, callerParses })).rejects.toThrow(/^job refused frame 5 with \d+ atoms$/);
    }
    await expect(mapFrames(plain, { module: JOBS, fn: 'notAFunction' }, { workers: 2, batchBytes: BATCH })).rejects.toThrow(`does not export a function 'notAFunction'`);
  });

  const dist = fileURLToPath(new URL('../../../dist/atoms/xyz/map.js', import.meta.url));
  it.skipIf(!existsSync(dist))('the built dist/ runs plain JavaScript workers with the same results', async () => {
    const mod = (await import(pathToFileURL(dist).href)) as typeof import('../../../src/atoms/xyz/map.js');
    const jsJob = join(dir, 'job.mjs');
    writeFileSync(jsJob, 'export function count(frame, index) { let s = 0; for (const x of frame.positions) s += x; return [index, frame.species.length, s]; }\n');
    const jsJobUrl = pathToFileURL(jsJob).href;
    const seq = await mod.mapFrames(plain, { module: jsJobUrl, fn: 'count' }, { workers: 1 });
    const par = await mod.mapFrames(plain, { module: jsJobUrl, fn: 'count' }, { workers: 2, batchBytes: BATCH, callerParses: false });
    expect(mod.lastMapStats.mode).toBe('parallel');
    expect(par).toEqual(seq);
    expect(seq.length).toBe(120);
  });

  it.skipIf(!existsSync(dist))('takes a worker started ahead of need (as `ratchet check` does) in both parallel modes, same results', async () => {
    const mod = (await import(pathToFileURL(dist).href)) as typeof import('../../../src/atoms/xyz/map.js');
    const spare = (await import(new URL('../../../dist/atoms/xyz/spare.js', import.meta.url).href)) as typeof import('../../../src/atoms/xyz/spare.js');
    const jsJob = join(dir, 'job-spare.mjs');
    writeFileSync(jsJob, 'export function count(frame, index) { let s = 0; for (const x of frame.positions) s += x; return [index, frame.species.length, s]; }\n');
    const jsJobUrl = pathToFileURL(jsJob).href;
    const seq = await mod.mapFrames(plain, { module: jsJobUrl, fn: 'count' }, { workers: 1 });
    for (const usesIndex of [true, false]) {
      spare.startSpareWorkers(1, [jsJobUrl]);
      expect(spare.spareWorkerCount()).toBe(1);
      const par = await mod.mapFrames<unknown[]>(plain, { module: jsJobUrl, fn: 'count', usesIndex }, { workers: 2, batchBytes: BATCH, rangeBytes: BATCH, callerParses: false });
      expect(spare.spareWorkerCount()).toBe(0);
      expect(mod.lastMapStats.mode).toBe(usesIndex ? 'parallel' : 'ranges');
      // range-split mode calls the job with index -1 for frames of ranges parsed ahead: compare the rest
      expect(par.map((r) => (r as number[]).slice(usesIndex ? 0 : 1))).toEqual(seq.map((r) => (r as number[]).slice(usesIndex ? 0 : 1)));
    }
  });
});
