/**
 * The ledger: `.ratchet/ledger.jsonl` in the campaign directory, one JSON event per line.
 *
 * Writing (Journal): one writer at a time through `.ratchet/lock`; every event is assigned the next
 * `seq` (from 1) and an ISO 8601 time `at`, serialised to one line and written with one write call
 * to a file opened for appending, then fdatasync'ed before append() resolves. An event whose append()
 * resolved survives a crash of the process or the machine.
 *
 * Reading (readLedger, foldLedger): never takes the lock. A last line without its newline is a write
 * cut short by a crash (or a write in progress by the live writer): it is skipped and reported. Any
 * other malformed line is an error naming the file and line. When a Journal opens a ledger with such a
 * torn tail, the tail's bytes are first saved to `.ratchet/torn-<time>.jsonl` and then cut off, so the
 * file stays valid JSONL and nothing is silently lost.
 */
import { promises as fsp } from 'node:fs';
import { isAscii } from 'node:buffer';
import { join } from 'node:path';
import { acquireLock, RATCHET_DIR, type AcquireOptions, type Lock } from './lock.js';

export const LEDGER_FILE = 'ledger.jsonl';

/** An event as given to append(): any JSON-serialisable fields plus a type. */
export interface NewEvent {
  type: string;
  [key: string]: unknown;
}

/** An event as recorded. */
export interface LedgerEvent {
  seq: number;
  at: string;
  type: string;
  [key: string]: unknown;
}

/** A last line cut short by a crash: its 1-based line number and its text (at most 200 characters). */
export interface TornLine {
  line: number;
  text: string;
  /** Byte offset in the file where the torn line starts (= length of the valid part). */
  offset: number;
  /** Length in bytes of the torn tail. */
  bytes: number;
}

export interface LedgerRead {
  events: LedgerEvent[];
  torn?: TornLine;
}

/** A ledger that cannot be read: names the file and line. */
export class LedgerError extends Error {
  override name = 'LedgerError';
  constructor(
    message: string,
    readonly file: string,
    readonly line?: number,
  ) {
    super(line === undefined ? `${file}: ${message}` : `${file}:${line}: ${message}`);
  }
}

export function ledgerPath(campaignDir: string): string {
  return join(campaignDir, RATCHET_DIR, LEDGER_FILE);
}

const NEWLINE = 0x0a;
const SNIPPET = 200;

/** Parse one line; throws LedgerError naming the line when it is not a ledger event. */
function parseLine(text: string, file: string, line: number, prevSeq: number): LedgerEvent {
  let v: unknown;
  try {
    v = JSON.parse(text);
  } catch (err) {
    throw new LedgerError(
      `malformed ledger line (${(err as Error).message}); expected one JSON event per line, found ${JSON.stringify(snippet(text))}`,
      file,
      line,
    );
  }
  if (v === null || typeof v !== 'object' || Array.isArray(v)) {
    throw new LedgerError(`expected a JSON object, found ${JSON.stringify(snippet(text))}`, file, line);
  }
  const e = v as LedgerEvent;
  if (typeof e.seq !== 'number' || typeof e.type !== 'string' || typeof e.at !== 'string') {
    throw new LedgerError(`expected an event with numeric "seq", string "at" and "type", found ${JSON.stringify(snippet(text))}`, file, line);
  }
  if (e.seq <= prevSeq) {
    throw new LedgerError(`seq ${e.seq} does not follow seq ${prevSeq}; the ledger must only grow (was it edited or written by two processes?)`, file, line);
  }
  return e;
}

function snippet(text: string): string {
  return text.length > SNIPPET ? text.slice(0, SNIPPET) + '…' : text;
}

export interface FoldOptions {
  /** Read chunk size in bytes (default 1 MiB). */
  chunkBytes?: number;
}

export interface FoldResult<S> {
  state: S;
  /** Number of events folded. */
  count: number;
  /** Highest seq seen (0 for an empty ledger). */
  lastSeq: number;
  torn?: TornLine;
  /** Byte length of the valid part of the file. */
  validBytes: number;
}

/**
 * Stream the ledger of a campaign, folding each event into a state, in constant memory apart from
 * the state. A missing ledger folds to the initial state. Never takes the lock.
 * `reducer` may mutate and return its state (fastest) or return a new one.
 */
export async function foldLedger<S>(
  campaignDir: string,
  reducer: (state: S, event: LedgerEvent) => S,
  initial: S,
  opts: FoldOptions = {},
): Promise<FoldResult<S>> {
  return foldFile(ledgerPath(campaignDir), reducer, initial, opts);
}

/** foldLedger on an explicit ledger file path. */
export async function foldFile<S>(
  file: string,
  reducer: (state: S, event: LedgerEvent) => S,
  initial: S,
  opts: FoldOptions = {},
): Promise<FoldResult<S>> {
  let state = initial;
  let count = 0;
  let lastSeq = 0;
  let lineNo = 0;
  let validBytes = 0; // bytes up to and including the last newline seen
  let carry: Buffer[] = []; // bytes of a line not yet ended
  let carryBytes = 0;

  let fh: fsp.FileHandle;
  try {
    fh = await fsp.open(file, 'r');
  } catch (err) {
    if ((err as NodeJS.ErrnoException).code === 'ENOENT') return { state, count, lastSeq, validBytes: 0 };
    throw err;
  }
  const stream = fh.createReadStream({ highWaterMark: opts.chunkBytes ?? 1 << 20 });

  const take = (text: string): void => {
    lineNo++;
    if (text.length === 0 || isBlank(text)) return;
    const e = parseLine(text, file, lineNo, lastSeq);
    lastSeq = e.seq;
    state = reducer(state, e);
    count++;
  };

  let totalBytes = 0;
  for await (const chunk of stream as AsyncIterable<Buffer>) {
    totalBytes += chunk.length;
    const last = chunk.lastIndexOf(NEWLINE);
    if (last === -1) {
      carry.push(chunk);
      carryBytes += chunk.length;
      continue;
    }
    // Decode everything up to the chunk's last newline at once (a newline never splits a UTF-8
    // sequence), then split into lines; the first line may continue bytes carried from before.
    const part = carryBytes > 0 ? Buffer.concat([...carry, chunk.subarray(0, last)]) : chunk.subarray(0, last);
    carry = [];
    carryBytes = 0;
    // Pure ASCII (the usual case: JSON escapes control characters, paths are mostly ASCII) decodes
    // faster as latin1, which is the same text for bytes < 0x80.
    const body = isAscii(part) ? part.toString('latin1') : part.toString('utf8');
    let from = 0;
    for (let nl = body.indexOf('\n'); nl !== -1; nl = body.indexOf('\n', from)) {
      take(body.slice(from, nl));
      from = nl + 1;
    }
    take(body.slice(from));
    if (last + 1 < chunk.length) {
      const rest = chunk.subarray(last + 1);
      carry.push(rest);
      carryBytes += rest.length;
    }
  }
  let torn: TornLine | undefined;
  if (carryBytes > 0) {
    const text = Buffer.concat(carry).toString('utf8');
    torn = { line: lineNo + 1, text: snippet(text), offset: 0, bytes: carryBytes };
  }
  validBytes = totalBytes - carryBytes;
  if (torn) torn.offset = validBytes;
  return { state, count, lastSeq, torn, validBytes };
}

function isBlank(s: string): boolean {
  for (let i = 0; i < s.length; i++) {
    const c = s.charCodeAt(i);
    if (c !== 32 && c !== 9 && c !== 13) return false;
  }
  return true;
}

/**
 * All events of a campaign's ledger (read-only, no lock). A torn last line is skipped and reported
 * in `torn`; a malformed line elsewhere throws LedgerError naming the line. No ledger = no events.
 */
export async function readLedger(campaignDir: string): Promise<LedgerRead> {
  const r = await foldLedger<LedgerEvent[]>(
    campaignDir,
    (acc, e) => {
      acc.push(e);
      return acc;
    },
    [],
  );
  return r.torn ? { events: r.state, torn: r.torn } : { events: r.state };
}

export interface OpenOptions extends AcquireOptions {
  /** Keep the events read at open time in `journal.history` (default true; false saves memory on long ledgers). */
  history?: boolean;
}

/** The single writer of a campaign's ledger. */
export class Journal {
  private chain: Promise<unknown> = Promise.resolve();
  private closed = false;
  private broken: Error | null = null;

  private constructor(
    readonly campaignDir: string,
    readonly file: string,
    private readonly fh: fsp.FileHandle,
    private readonly lock: Lock,
    private seqNow: number,
    /** The events recorded before this Journal was opened (read while holding the lock). */
    readonly history: LedgerEvent[],
    /** A torn tail found and saved aside at open time, if any. */
    readonly repaired?: { torn: TornLine; savedTo: string },
  ) {}

  /**
   * Take the lock, read the existing ledger, repair a torn tail (saved to .ratchet/torn-<time>.jsonl
   * first, then cut off), and open the file for appending.
   */
  static async open(campaignDir: string, opts: OpenOptions = {}): Promise<Journal> {
    const lock = await acquireLock(campaignDir, opts);
    try {
      const file = ledgerPath(campaignDir);
      const log = opts.log ?? ((m: string) => process.stderr.write(`ratchet: ${m}\n`));
      const created = !(await exists(file));
      const keep = opts.history ?? true;
      const r = await foldFile<LedgerEvent[]>(file, keep ? (acc, e) => (acc.push(e), acc) : (acc) => acc, []);
      let repaired: { torn: TornLine; savedTo: string } | undefined;
      if (r.torn) {
        const savedTo = await saveTornTail(campaignDir, file, r.torn);
        repaired = { torn: r.torn, savedTo };
        log(
          `${file}:${r.torn.line}: the last line was cut short (a crash during a write); ` +
            `${r.torn.bytes} bytes starting ${JSON.stringify(r.torn.text.slice(0, 60))} moved to ${savedTo}`,
        );
      }
      const fh = await fsp.open(file, 'a', 0o644);
      if (created) await syncDir(join(campaignDir, RATCHET_DIR));
      return new Journal(campaignDir, file, fh, lock, r.lastSeq, r.state, repaired);
    } catch (err) {
      await lock.release();
      throw err;
    }
  }

  /** The seq of the last event recorded (0 when none). */
  get lastSeq(): number {
    return this.seqNow;
  }

  /**
   * Record one event: assigns seq and at, writes one line, fdatasyncs. Resolves once the line is on
   * disk. Calls are recorded in call order.
   */
  append<E extends NewEvent>(event: E): Promise<Omit<E, 'seq' | 'at'> & LedgerEvent> {
    return this.appendMany([event]).then((r) => r[0]);
  }

  /** Record several events with a single write and a single sync (all or, after a crash, a prefix). */
  appendMany<E extends NewEvent>(events: E[]): Promise<Array<Omit<E, 'seq' | 'at'> & LedgerEvent>> {
    if (this.closed) return Promise.reject(new Error(`${this.file}: the journal is closed`));
    if (this.broken) return Promise.reject(this.broken);
    const recorded: Array<Omit<E, 'seq' | 'at'> & LedgerEvent> = [];
    let text = '';
    try {
      for (const ev of events) {
        if (!ev || typeof ev.type !== 'string' || ev.type.length === 0) {
          throw new Error(`ledger event needs a non-empty string "type", got ${JSON.stringify(ev)}`);
        }
        // seq and at first so a line reads well; the caller's own seq/at would be overwritten.
        const { seq: _s, at: _a, ...rest } = ev;
        const e = { seq: this.seqNow + recorded.length + 1, at: new Date().toISOString(), ...rest } as unknown as Omit<E, 'seq' | 'at'> & LedgerEvent;
        const line = JSON.stringify(e);
        if (line.includes('\n')) throw new Error('internal: serialised event contains a newline');
        text += line + '\n';
        recorded.push(e);
      }
    } catch (err) {
      return Promise.reject(err);
    }
    if (recorded.length === 0) return Promise.resolve([]);
    this.seqNow += recorded.length;
    const buf = Buffer.from(text, 'utf8');
    const p = this.chain.then(async () => {
      if (this.broken) throw this.broken;
      try {
        await writeAll(this.fh, buf);
        await this.fh.datasync();
      } catch (err) {
        // The file's tail is now unknown; refuse further writes rather than risk a corrupt ledger.
        this.broken = new Error(`${this.file}: a ledger write failed (${(err as Error).message}); reopen the campaign`);
        throw this.broken;
      }
      return recorded;
    });
    this.chain = p.catch(() => undefined);
    return p;
  }

  /** Wait for pending appends, close the file and release the lock. */
  async close(): Promise<void> {
    if (this.closed) return;
    this.closed = true;
    try {
      await this.chain;
      await this.fh.close();
    } finally {
      await this.lock.release();
    }
  }
}

async function writeAll(fh: fsp.FileHandle, buf: Buffer): Promise<void> {
  let off = 0;
  while (off < buf.length) {
    const { bytesWritten } = await fh.write(buf, off, buf.length - off);
    off += bytesWritten;
  }
}

async function exists(p: string): Promise<boolean> {
  try {
    await fsp.stat(p);
    return true;
  } catch {
    return false;
  }
}

async function syncDir(dir: string): Promise<void> {
  try {
    const d = await fsp.open(dir, 'r');
    try {
      await d.sync();
    } finally {
      await d.close();
    }
  } catch {
    /* some filesystems refuse fsync on directories; the file itself is synced */
  }
}

/** Copy the torn tail to .ratchet/torn-<time>.jsonl (synced), then truncate the ledger to its valid part. */
async function saveTornTail(campaignDir: string, file: string, torn: TornLine): Promise<string> {
  const fh = await fsp.open(file, 'r+');
  try {
    const buf = Buffer.alloc(torn.bytes);
    let got = 0;
    while (got < torn.bytes) {
      const { bytesRead } = await fh.read(buf, got, torn.bytes - got, torn.offset + got);
      if (bytesRead === 0) break;
      got += bytesRead;
    }
    const stamp = new Date().toISOString().replace(/[:.]/g, '-');
    let savedTo = join(campaignDir, RATCHET_DIR, `torn-${stamp}.jsonl`);
    for (let i = 1; await exists(savedTo); i++) savedTo = join(campaignDir, RATCHET_DIR, `torn-${stamp}-${i}.jsonl`);
    const out = await fsp.open(savedTo, 'wx', 0o644);
    try {
      await writeAll(out, buf.subarray(0, got));
      await out.sync();
    } finally {
      await out.close();
    }
    await syncDir(join(campaignDir, RATCHET_DIR));
    await fh.truncate(torn.offset);
    await fh.sync();
    return savedTo;
  } finally {
    await fh.close();
  }
}
