/**
 * Worker thread of mapFrames: parses the frames of the byte batches it is sent (only the requested
 * columns) and applies the job function, posting the results (or the first error) back.
 */
import { parentPort, workerData } from 'node:worker_threads';
import type { Frame } from '../frame.js';
import { parseFrame } from './frame-parse.js';
import type { FrameSpan } from './scanner.js';
import { SPAN_FIELDS, serializeError, type BatchMessage, type FrameJob, type ReplyMessage } from './map-protocol.js';

const { file, job } = workerData as { file: string; job: FrameJob };
const port = parentPort!;
const wanted = job.columns ? new Set(job.columns) : null;

const ready: Promise<(frame: Frame, index: number, options: unknown) => unknown> = (async () => {
  const mod = (await import(job.module)) as Record<string, unknown>;
  const fn = mod[job.fn];
  if (typeof fn !== 'function') throw new Error(`${job.module} does not export a function '${job.fn}'`);
  return fn as (frame: Frame, index: number, options: unknown) => unknown;
})();
ready.catch(() => undefined);

port.on('message', async (msg: BatchMessage) => {
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
      const frame = parseFrame(buf, span, file, wanted, msg.lastLineOpen);
      results.push(await fn(frame, span.index, job.options));
    }
    reply = { id: msg.id, results };
  } catch (err) {
    reply = { id: msg.id, error: serializeError(err) };
  }
  reply.buf = msg.buf;
  port.postMessage(reply, [msg.buf]);
});
