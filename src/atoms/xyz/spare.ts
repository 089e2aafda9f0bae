/**
 * Worker threads started ahead of need. A worker thread takes about 0.1-0.2 s to start (its own JavaScript engine,
 * Node's bootstrap, the parser's modules), during which the calling thread reads alone. A command that knows early
 * that it will read a big file in parallel (the `ratchet check` gates) starts its workers first thing, while the rest
 * of the program loads, and mapFrames takes them from here instead of starting new ones. A spare worker that is never
 * taken does not keep the process alive (unref) and costs one thread's start-up.
 *
 * Kept small on purpose: the command line imports this module before anything else.
 */
import { Worker } from 'node:worker_threads';

/** Messages a spare worker understands before its job: the job itself (see map-worker.ts). */
export interface JobMessage {
  kind: 'job';
  file: string;
  job: unknown;
}

/** Files at least this big are read in parallel by mapFrames (two of its default 2 MiB batches). */
export const PARALLEL_MIN_BYTES = 4 << 20;

const spares: { entry: string; worker: Worker }[] = [];

/** The worker entry next to this module; null when running from TypeScript sources (mapFrames starts those itself). */
function entryUrl(): URL | null {
  return import.meta.url.endsWith('.ts') ? null : new URL('./map-worker.js', import.meta.url);
}

/** Start `count` workers that load `preload` (module URLs, e.g. a gate's) and wait for a job. */
export function startSpareWorkers(count: number, preload: string[] = []): void {
  const entry = entryUrl();
  if (entry === null) return;
  for (let k = 0; k < count; k++) {
    const worker = new Worker(entry, { workerData: { file: null, job: null, preload } });
    worker.unref();
    const item = { entry: entry.href, worker };
    const drop = () => {
      const at = spares.indexOf(item);
      if (at >= 0) spares.splice(at, 1);
    };
    worker.once('error', drop);
    worker.once('exit', drop);
    spares.push(item);
  }
}

/** A spare worker started from `entry`, now given its job (the caller owns it from here), or null. */
export function takeSpareWorker(entry: URL | string, file: string, job: unknown): Worker | null {
  const href = typeof entry === 'string' ? entry : entry.href;
  const at = spares.findIndex((s) => s.entry === href);
  if (at < 0) return null;
  const { worker } = spares.splice(at, 1)[0];
  worker.ref();
  const msg: JobMessage = { kind: 'job', file, job };
  worker.postMessage(msg);
  return worker;
}

/** Spare workers waiting (for tests). */
export function spareWorkerCount(): number {
  return spares.length;
}
