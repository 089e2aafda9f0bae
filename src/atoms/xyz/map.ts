/**
 * mapFrames: apply a pure per-frame function to every frame of a file, results in file order.
 *
 * With workers = n > 1 the calling thread reads the file (inflating gzip itself: a gzip stream cannot
 * be split by offset), finds frame boundaries with a native newline scan and groups whole frames into
 * batches; n - 1 worker threads get batches copied into recycled buffers (transferred, not cloned) and
 * parse only the requested columns and apply the function; when they all have MAX_QUEUED batches queued,
 * the calling thread parses the next batch itself. At most MAX_QUEUED (4) batches per worker are in flight
 * (backpressure), so memory stays bounded whatever the file size. Errors surface as the same XyzError
 * (file and absolute line) as the sequential reader gives, and the first error in file order wins.
 * Small files (under 2 batches) are read on the calling thread only.
 *
 * Range-split mode, for jobs that declare usesIndex: false, on plain files: every thread reads and parses byte ranges
 * of the file itself, and only the per-frame results cross threads (see ranges() and range.ts).
 *
 * Running from TypeScript sources (this module's URL ends in .ts, as under vitest or tsx), workers
 * register tsx themselves (Node 20 does not apply --import hooks inside worker threads); when tsx
 * cannot be found the work is done on the calling thread instead.
 */
import { readFileSync } from 'node:fs';
import { open, stat } from 'node:fs/promises';
import { dirname, join } from 'node:path';
import { createRequire } from 'node:module';
import { pathToFileURL } from 'node:url';
import { Worker } from 'node:worker_threads';
import type { Frame } from '../frame.js';
import { parseFrame } from './frame-parse.js';
import {
  deserializeError,
  serializeError,
  SPAN_FIELDS,
  type BatchMessage,
  type FrameJob,
  type RangeMessage,
  type RangeReply,
  type ReplyMessage,
} from './map-protocol.js';
import { guessFrameStart, parseRange, type RangeBase, type RangeScratch } from './range.js';
import { readFrames } from './reader.js';
import { END, FrameScanner, type FrameSpan } from './scanner.js';
import { openSource, requireRegularFile } from './source.js';
import { takeSpareWorker } from './spare.js';

export type { FrameJob } from './map-protocol.js';

export interface MapOptions {
  /**
   * Threads that parse, the calling thread included: 1 (the default) parses on the calling thread only;
   * n > 1 starts n - 1 worker threads and the calling thread takes a share of the batches too.
   */
  workers?: number;
  /** Bytes of whole frames per batch sent to a worker (default 2 MiB). Files under 2 batches are read on the calling thread. */
  batchBytes?: number;
  /** Let the calling thread parse batches when every worker is busy (default true); false sends every batch to a worker. */
  callerParses?: boolean;
  /**
   * Range-split mode (jobs with usesIndex: false, plain files): bytes per range (default: the file size over 4 ranges
   * per thread, from 1 to 8 MiB).
   */
  rangeBytes?: number;
}

/** How mapFrames ran, for tests and benchmarks. */
export interface MapStats {
  /** parallel: the calling thread ships batches of bytes to workers; ranges: each thread reads byte ranges itself. */
  mode: 'sequential' | 'parallel' | 'ranges';
  /** Why the sequential path was taken, when it was. */
  reason?: string;
  batches: number;
  /** Batches parsed on the calling thread (parallel mode). */
  callerBatches?: number;
  /** Most batches in flight to workers at once. */
  maxInFlight: number;
  /** Ranges mode: ranges whose guessed start was wrong or whose parse failed, parsed again on the calling thread. */
  reparsed?: number;
  /** Ranges mode: ranges that held no frame start. */
  empty?: number;
}

/** Statistics of the last mapFrames call (in this thread). */
export let lastMapStats: MapStats = { mode: 'sequential', batches: 0, maxInFlight: 0 };

const DEFAULT_BATCH = 2 << 20;
const DEFAULT_RANGE = 8 << 20;
const MIN_RANGE = 1 << 20;
/** Ranges queued per worker thread in range-split mode. */
const RANGES_QUEUED = 2;
/**
 * Batches queued per worker thread: enough to hide the latency of waking a thread (a 2 MiB batch is
 * parsed in 2-4 ms), few enough to bound memory (MAX_QUEUED x 4 MiB recycled buffers per worker).
 */
export const MAX_QUEUED = 4;
const TS_FILE = /\.[mc]?tsx?$/;

type JobFn<R> = (frame: Frame, index: number, options: unknown) => R | Promise<R>;

/** Apply a job to every frame of an extended XYZ file, returning results in file order. */
export async function mapFrames<R>(path: string, job: FrameJob, opts: MapOptions = {}): Promise<R[]> {
  const workers = Math.min(64, Math.max(1, Math.floor(opts.workers ?? 1)));
  const batchBytes = Math.max(1, Math.floor(opts.batchBytes ?? DEFAULT_BATCH));
  if (workers <= 1) return sequential(path, job, 'workers <= 1');
  const { size } = await stat(path);
  if (size < 2 * batchBytes) return sequential(path, job, `file smaller than 2 batches (${size} bytes)`);
  const splittable = job.usesIndex === false && !(await isGzip(path));
  // about 4 ranges per thread at least (for balance), at most DEFAULT_RANGE bytes each
  const rangeBytes = Math.max(1, Math.floor(opts.rangeBytes ?? Math.min(DEFAULT_RANGE, Math.max(MIN_RANGE, Math.ceil(size / (4 * workers))))));
  const launch = workerLaunch(job);
  if (launch === null) return sequential(path, job, 'TypeScript sources and no tsx loader for worker threads');
  const fn = await loadFn<R>(job);
  if (splittable) return ranges<R>(path, size, job, fn, workers, rangeBytes, launch);
  return parallel<R>(path, job, fn, workers, batchBytes, launch, opts.callerParses ?? true);
}

async function loadFn<R>(job: FrameJob): Promise<JobFn<R>> {
  const mod = (await import(job.module)) as Record<string, unknown>;
  const fn = mod[job.fn];
  if (typeof fn !== 'function') throw new Error(`${job.module} does not export a function '${job.fn}'`);
  return fn as JobFn<R>;
}

async function sequential<R>(path: string, job: FrameJob, reason: string): Promise<R[]> {
  const fn = await loadFn<R>(job);
  const out: R[] = [];
  let index = 0;
  for await (const frame of readFrames(path, { columns: job.columns, positions: job.positions })) out.push(await fn(frame, index++, job.options));
  lastMapStats = { mode: 'sequential', reason, batches: 0, maxInFlight: 0 };
  return out;
}

interface Launch {
  /** Worker entry: a file URL, or bootstrap code (eval) that registers tsx and imports the entry. */
  entry: URL | string;
  eval: boolean;
  /** Extra workerData for the bootstrap. */
  boot?: { tsxApi: string; entry: string };
}

/**
 * Bootstrap for workers that must load TypeScript: on Node 20, tsx's `--import` hooks are not applied
 * inside worker threads, so the worker registers tsx's ESM hooks itself and then imports the entry.
 */
const BOOT = `
const { workerData } = require('node:worker_threads');
(async () => {
  const { register } = await import(workerData.__boot.tsxApi);
  register();
  await import(workerData.__boot.entry);
})().catch((err) => { setImmediate(() => { throw err; }); });
`;

/** A worker thread for the job: a spare one started ahead of need (spare.ts) when there is one, else a new one. */
function startWorker(launch: Launch, path: string, job: FrameJob): Worker {
  if (!launch.eval) {
    const spare = takeSpareWorker(launch.entry, path, job);
    if (spare !== null) return spare;
  }
  const workerData = { file: path, job, __boot: launch.boot };
  return launch.eval ? new Worker(launch.entry as string, { eval: true, workerData, execArgv: [] }) : new Worker(launch.entry, { workerData });
}

/** Worker entry and loader; null when TypeScript is involved and no tsx loader can be found. */
function workerLaunch(job: FrameJob): Launch | null {
  const here = import.meta.url;
  const fromTs = TS_FILE.test(new URL(here).pathname);
  const url = new URL(fromTs ? './map-worker.ts' : './map-worker.js', here);
  const jobTs = TS_FILE.test(safePath(job.module));
  if (!fromTs && !jobTs) return { entry: url, eval: false };
  const tsxApi = tsxEsmApi(here);
  if (tsxApi === null) return null;
  return { entry: BOOT, eval: true, boot: { tsxApi, entry: url.href } };
}

/** File URL of tsx's ESM API (package export "./esm/api", import condition), or null. */
function tsxEsmApi(from: string): string | null {
  try {
    const require = createRequire(from);
    const pkgPath = require.resolve('tsx/package.json');
    const pkg = JSON.parse(readFileSync(pkgPath, 'utf8')) as { exports?: Record<string, unknown> };
    const exp = pkg.exports?.['./esm/api'] as { import?: { default?: string } | string } | undefined;
    const rel = typeof exp?.import === 'string' ? exp.import : exp?.import?.default;
    if (!rel) return null;
    return pathToFileURL(join(dirname(pkgPath), rel)).href;
  } catch {
    return null;
  }
}

function safePath(u: string): string {
  try {
    return new URL(u).pathname;
  } catch {
    return u;
  }
}

interface Slot {
  worker: Worker;
  outstanding: number;
}

/**
 * The parallel path: `threads` parsing threads, the calling thread included. The calling thread reads
 * and scans the file; each batch of whole frames goes to a worker thread that has fewer than MAX_QUEUED
 * batches queued, or, when all are busy, is parsed right here (so that on 2 cores, 2 threads share the work and
 * no core is oversubscribed by a thread that only waits).
 */
async function parallel<R>(
  path: string,
  job: FrameJob,
  fn: JobFn<R>,
  threads: number,
  batchBytes: number,
  launch: Launch,
  callerParses: boolean,
): Promise<R[]> {
  const source = await openSource(path);
  const scanner = new FrameScanner(source, path);
  const wanted = job.columns ? new Set(job.columns) : null;
  const slots: Slot[] = [];
  const done = new Map<number, ReplyMessage>();
  const pool: ArrayBuffer[] = [];
  const out: R[] = [];
  let flushed = 0;
  let nextId = 0;
  let inFlight = 0;
  let maxInFlight = 0;
  let callerBatches = 0;
  let failedAt = Infinity; // smallest batch id that failed
  let fatal: Error | null = null; // a worker that died
  let wake: (() => void) | null = null;
  const notify = () => {
    const w = wake;
    wake = null;
    w?.();
  };

  for (let k = 0; k < threads - 1; k++) {
    const worker = startWorker(launch, path, job);
    const slot: Slot = { worker, outstanding: 0 };
    worker.on('message', (msg: ReplyMessage) => {
      slot.outstanding--;
      inFlight--;
      if (msg.buf !== undefined) pool.push(msg.buf);
      done.set(msg.id, msg);
      if ('error' in msg && msg.id < failedAt) failedAt = msg.id;
      notify();
    });
    worker.on('error', (err) => {
      fatal ??= err;
      notify();
    });
    worker.on('exit', (code) => {
      if (code !== 0) fatal ??= new Error(`mapFrames worker exited with code ${code}`);
      notify();
    });
    slots.push(slot);
  }

  const waitForProgress = () => new Promise<void>((resolve) => (wake = resolve));

  const flush = () => {
    for (;;) {
      const msg = done.get(flushed);
      if (msg === undefined || 'error' in msg) return;
      done.delete(flushed);
      for (const r of msg.results) out.push(r as R);
      flushed++;
    }
  };

  /** Parse a batch on this thread, straight from the scanner's window. */
  const local = async (batch: FrameSpan[], id: number) => {
    try {
      const results: unknown[] = [];
      for (const span of batch) results.push(await fn(parseFrame(scanner.buf, span, path, wanted, scanner.lastLineOpen, job.positions ?? true), span.index, job.options));
      done.set(id, { id, results });
    } catch (err) {
      done.set(id, { id, error: serializeError(err) });
      if (id < failedAt) failedAt = id;
    }
  };

  const dispatch = async (batch: FrameSpan[]) => {
    const id = nextId++;
    let best: Slot | null = null;
    for (;;) {
      if (fatal) throw fatal;
      for (const s of slots) if (s.outstanding < MAX_QUEUED && (best === null || s.outstanding < best.outstanding)) best = s;
      if (best !== null) break;
      if (callerParses) {
        callerBatches++;
        await local(batch, id);
        flush();
        return;
      }
      await waitForProgress();
      flush();
    }
    const base = batch[0].start;
    const end = batch[batch.length - 1].end;
    // Batch buffers come back from the workers and are reused: fresh large buffers cost page faults.
    let ab = pool.pop();
    while (ab !== undefined && ab.byteLength < end - base) ab = pool.pop();
    ab ??= new ArrayBuffer(Math.max(end - base, 2 * batchBytes));
    new Uint8Array(ab, 0, end - base).set(scanner.buf.subarray(base, end));
    const spans = new Float64Array(batch.length * SPAN_FIELDS);
    batch.forEach((s, k) => {
      spans.set([s.index, s.line, s.natoms, s.start - base, s.commentStart - base, s.commentEnd - base, s.atomsStart - base, s.end - base], k * SPAN_FIELDS);
    });
    const open = scanner.lastLineOpen;
    const msg: BatchMessage = { id, buf: ab, length: end - base, spans, lastLineOpen: open >= base && open < end ? open - base : -1 };
    best.outstanding++;
    inFlight++;
    maxInFlight = Math.max(maxInFlight, inFlight);
    best.worker.postMessage(msg, [msg.buf, spans.buffer]);
    flush();
  };

  let scanError: unknown = null;
  try {
    let batch: FrameSpan[] = [];
    for (;;) {
      if (failedAt !== Infinity || fatal) break;
      let span: FrameSpan | null | typeof END;
      try {
        span = scanner.take();
        if (span === null) {
          if (batch.length > 0) await dispatch(batch);
          batch = [];
          await scanner.fill();
          continue;
        }
      } catch (err) {
        scanError = err;
        break;
      }
      if (span === END) break;
      batch.push(span);
      if (span.end - batch[0].start >= batchBytes) {
        await dispatch(batch);
        batch = [];
      }
    }
    if (batch.length > 0 && failedAt === Infinity && !fatal) await dispatch(batch);
    while (inFlight > 0 && !fatal) {
      await waitForProgress();
      flush();
    }
    if (fatal) throw fatal;
    flush();
    const failed = done.get(flushed);
    if (failed !== undefined && 'error' in failed) throw deserializeError(failed.error);
    if (scanError !== null) throw scanError;
    lastMapStats = { mode: 'parallel', batches: nextId, callerBatches, maxInFlight };
    return out;
  } finally {
    await Promise.all(slots.map((s) => s.worker.terminate()));
    await source.close();
  }
}

/** Does the file start with the gzip magic bytes? */
async function isGzip(path: string): Promise<boolean> {
  const fh = await open(path, 'r');
  try {
    requireRegularFile(path, await fh.stat());
    const head = Buffer.alloc(2);
    const { bytesRead } = await fh.read(head, 0, 2, 0);
    return bytesRead === 2 && head[0] === 0x1f && head[1] === 0x8b;
  } finally {
    await fh.close();
  }
}

/** A range's outcome; `raw`: the error itself when the range was parsed on this thread. */
type RangeDone = RangeReply & { trusted: boolean; raw?: unknown };

/**
 * Range-split mode (see range.ts): the file is cut into ranges of about rangeBytes; every thread, the calling one
 * included, opens the file and reads and parses whole ranges itself, so only the small per-frame results cross
 * threads. Workers get RANGES_QUEUED ranges at a time, the calling thread takes the next range whenever they are
 * busy. Ranges are accepted in file order: a range is accepted only when its guessed start is exactly where the
 * accepted ranges before it ended; otherwise (and when it failed) it is parsed again here from its true start, with
 * its true line and frame numbers, so results and errors are those of the sequential reader.
 */
async function ranges<R>(path: string, size: number, job: FrameJob, fn: JobFn<R>, threads: number, rangeBytes: number, launch: Launch): Promise<R[]> {
  const count = Math.max(2, Math.round(size / rangeBytes));
  const bounds = Array.from({ length: count + 1 }, (_, k) => Math.round((k * size) / count));
  // the last range reads to the end of the file, as the sequential reader does (should the file have grown since)
  bounds[count] = Infinity;
  const wanted = job.columns ? new Set(job.columns) : null;
  const replies: (RangeDone | undefined)[] = new Array(count);
  const scratch: RangeScratch = {};
  const slots: { worker: Worker; outstanding: number; closed: Promise<void> }[] = [];
  const fh = await open(path, 'r');
  let next = 0; // next range to hand out
  let fatal: Error | null = null;
  let wake: (() => void) | null = null;
  const notify = () => {
    const w = wake;
    wake = null;
    w?.();
  };
  const waitForProgress = () => new Promise<void>((resolve) => (wake = resolve));

  /** Parse range k on this thread (from its guessed start, or from a known start with its base). */
  const local = async (k: number, known: { start: number; base: RangeBase } | null): Promise<RangeDone> => {
    let start = known ? known.start : -1;
    try {
      if (known === null) start = await guessFrameStart(fh, bounds[k], bounds[k + 1], scratch);
      if (start < 0) return { kind: 'range', id: k, start: -1, end: -1, lines: 0, frames: 0, results: [], trusted: false };
      const r = await parseRange(fh, path, start, bounds[k + 1], known ? known.base : null, wanted, fn, job.options, scratch, job.positions ?? true);
      return { kind: 'range', id: k, ...r, trusted: known !== null };
    } catch (err) {
      return { kind: 'range', id: k, start, error: serializeError(err), trusted: known !== null, raw: err };
    }
  };

  const feed = () => {
    for (const slot of slots) {
      while (slot.outstanding < RANGES_QUEUED && next < count && fatal === null) {
        const msg: RangeMessage = { kind: 'range', id: next, from: bounds[next], to: bounds[next + 1], base: null };
        next++;
        slot.outstanding++;
        slot.worker.postMessage(msg);
      }
    }
  };

  for (let w = 0; w < threads - 1; w++) {
    const worker = startWorker(launch, path, job);
    let closed!: () => void;
    const slot = { worker, outstanding: 0, closed: new Promise<void>((resolve) => (closed = resolve)) };
    worker.on('message', (msg: RangeReply | { kind: 'closed' }) => {
      if (msg.kind === 'closed') {
        closed();
        return;
      }
      slot.outstanding--;
      replies[msg.id] = { ...msg, trusted: false };
      feed();
      notify();
    });
    worker.on('error', (err) => {
      fatal ??= err;
      closed();
      notify();
    });
    worker.on('exit', (code) => {
      if (code !== 0) fatal ??= new Error(`mapFrames worker exited with code ${code}`);
      closed();
      notify();
    });
    slots.push(slot);
  }

  const out: R[] = [];
  let reparsed = 0;
  let empty = 0;
  let callerRanges = 0;
  try {
    // The calling thread starts with range 0 (its start is known) while the workers start up.
    next = 1;
    feed();
    replies[0] = await local(0, { start: 0, base: { line: 1, frame: 0 } });
    callerRanges++;
    let end = 0; // where the accepted ranges end (Infinity after the end of the file)
    const base: RangeBase = { line: 1, frame: 0 };
    for (let k = 0; k < count; ) {
      if (fatal) throw fatal;
      let r = replies[k];
      if (r === undefined) {
        if (next < count) {
          const j = next++;
          replies[j] = await local(j, null);
          callerRanges++;
          // (reads are synchronous: let the workers' messages in, so that their queues are refilled)
          await new Promise((resolve) => setImmediate(resolve));
        } else {
          await waitForProgress();
        }
        continue;
      }
      replies[k] = undefined;
      if (end >= bounds[k + 1]) {
        // the ranges before reach past this one: it holds no frame start
        empty++;
        k++;
        continue;
      }
      if (!(r.start === end && (r.trusted || !('error' in r)))) {
        reparsed++;
        r = await local(k, { start: end, base: { ...base } });
      }
      if ('error' in r) throw r.raw ?? deserializeError(r.error);
      for (const x of r.results) out.push(x as R);
      end = r.end;
      base.line += r.lines;
      base.frame += r.frames;
      k++;
    }
    return out;
  } finally {
    // (also when the file turned out to be bad: the statistics say how far the ranges got)
    lastMapStats = { mode: 'ranges', batches: count, callerBatches: callerRanges, maxInFlight: RANGES_QUEUED * slots.length, reparsed, empty };
    next = count;
    // The workers close their file and stop in the background: the results are complete, and an unreferenced worker
    // does not keep the process alive (a command exits 10-30 ms sooner).
    for (const s of slots) {
      s.worker.postMessage({ kind: 'close' });
      s.worker.unref();
      Promise.race([s.closed, new Promise((resolve) => setTimeout(resolve, 1000).unref())])
        .then(() => s.worker.terminate())
        .catch(() => undefined);
    }
    await fh.close();
  }
}
