/**
 * Worker thread of mapFrames: parses the frames of the byte batches it is sent (only the requested
 * columns) and applies the job function, posting the results (or the first error) back. In range-split
 * mode it is sent byte ranges instead, and reads them from the file itself (range.ts).
 */
import { open, type FileHandle } from 'node:fs/promises';
import { parentPort, workerData } from 'node:worker_threads';
import type { Frame } from '../frame.js';
import { parseFrame } from './frame-parse.js';
import type { FrameSpan } from './scanner.js';
import { SPAN_FIELDS, serializeError, type BatchMessage, type FrameJob, type RangeMessage, type RangeReply, type ReplyMessage } from './map-protocol.js';
import { guessFrameStart, parseRange, type RangeScratch } from './range.js';
import type { JobMessage } from './spare.js';

/**
 * The job: from workerData, or (a spare worker started ahead of need, see spare.ts) from the first message, after
 * loading the modules it was told to preload.
 */
const port = parentPort!;
const data = workerData as { file: string | null; job: FrameJob | null; preload?: string[] };
let file = '';
let job!: FrameJob;
let wanted: Set<string> | null = null;
let positions = true;
let ready!: Promise<(frame: Frame, index: number, options: unknown) => unknown>;

function configure(f: string, j: FrameJob): void {
  file = f;
  job = j;
  wanted = job.columns ? new Set(job.columns) : null;
  positions = job.positions ?? true;
  ready = (async () => {
    const mod = (await import(job.module)) as Record<string, unknown>;
    const fn = mod[job.fn];
    if (typeof fn !== 'function') throw new Error(`${job.module} does not export a function '${job.fn}'`);
    return fn as (frame: Frame, index: number, options: unknown) => unknown;
  })();
  ready.catch(() => undefined);
}

if (data.job !== null) configure(data.file!, data.job);
else for (const url of data.preload ?? []) import(url).catch(() => undefined);

let handle: Promise<FileHandle> | null = null;
const scratch: RangeScratch = {};
/** Range messages are handled one after the other (they share the scratch buffers). */
let queue: Promise<void> = Promise.resolve();

/** Range-split mode: read and parse a byte range of the file here (nothing but the results is sent back). */
async function range(msg: RangeMessage): Promise<RangeReply> {
  let start = msg.base ? msg.from : -1;
  try {
    const fn = await ready;
    handle ??= open(file, 'r');
    const fh = await handle;
    if (msg.base === null) start = await guessFrameStart(fh, msg.from, msg.to, scratch);
    if (start < 0) return { kind: 'range', id: msg.id, start: -1, end: -1, lines: 0, frames: 0, results: [] };
    const r = await parseRange(fh, file, start, msg.to, msg.base, wanted, fn, job.options, scratch, positions);
    return { kind: 'range', id: msg.id, ...r };
  } catch (err) {
    return { kind: 'range', id: msg.id, start, error: serializeError(err) };
  }
}

port.on('message', async (m: BatchMessage | RangeMessage | JobMessage | { kind: 'close' }) => {
  if ('kind' in m) {
    if (m.kind === 'job') {
      configure(m.file, m.job as FrameJob);
    } else if (m.kind === 'range') {
      queue = queue.then(async () => port.postMessage(await range(m)));
    } else {
      queue = queue.then(async () => {
        const h = handle;
        handle = null;
        if (h) await (await h.catch(() => null))?.close().catch(() => undefined);
        port.postMessage({ kind: 'closed' });
      });
    }
    return;
  }
  const msg = m;
  let reply: ReplyMessage;
  try {
    const fn = await ready;
    const buf = Buffer.from(msg.buf, 0, msg.length);
    const s = msg.spans;
    const results: unknown[] = [];
    for (let k = 0; k < s.length; k += SPAN_FIELDS) {
      // Offsets and counts as small integers (`| 0`): values read from a Float64Array are doubles, and
      // byte loops indexed by doubles run several times slower in V8.
      const span: FrameSpan = {
        index: s[k],
        line: s[k + 1],
        natoms: s[k + 2] | 0,
        start: s[k + 3] | 0,
        commentStart: s[k + 4] | 0,
        commentEnd: s[k + 5] | 0,
        atomsStart: s[k + 6] | 0,
        end: s[k + 7] | 0,
      };
      const frame = parseFrame(buf, span, file, wanted, msg.lastLineOpen, positions);
      results.push(await fn(frame, span.index, job.options));
    }
    reply = { id: msg.id, results };
  } catch (err) {
    reply = { id: msg.id, error: serializeError(err) };
  }
  reply.buf = msg.buf;
  port.postMessage(reply, [msg.buf]);
});
