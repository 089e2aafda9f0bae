/**
 * Audit: are the files the ledger registered still the files it registered?
 *
 * For each path the ledger registered (its latest registration there), the file or directory on
 * disk is hashed again (src/ledger/artifacts.ts) and compared with the recorded id: `missing` (gone),
 * `changed` (other content), or fine. The campaign's working folder `rounds/` is walked for files
 * no artifact covers:
 *   - ratchet's own records of a task or stage (task.json, run.sh, stdout.log, stderr.log, exit.json,
 *     runs.log, *.pid, check.json, sample.json, scheduler output): expected, counted;
 *   - other files inside a task's folder (rounds/rK/<stage>/<task>/...): outputs the task wrote that no
 *     gate read: fine, listed as `unread_outputs`;
 *   - anything else under rounds/ (beside the task folders): `unregistered`, reported as a problem.
 * The ledger itself is checked line by line: every line one JSON event, `seq` 1, 2, 3, ... without
 * gaps or repeats, and a last line ended by its newline (else a torn tail: a write cut short).
 *
 * Incremental: `.ratchet/audit.json` keeps (path, size, mtime, sha256) of what was hashed; a file
 * whose size and mtime are unchanged is not read again unless `full` (a directory is re-read when
 * any file below it changed size or mtime, or was added or removed). The result says how many
 * files were hashed.
 */
import { createReadStream, lstatSync, promises as fsp, readdirSync, statSync } from 'node:fs';
import { createInterface } from 'node:readline';
import { join } from 'node:path';
import { createHash } from 'node:crypto';
import { hashArtifact, hashFile, idHex, type ArtifactEvent } from './artifacts.js';
import { ledgerPath } from './journal.js';
import { RATCHET_DIR } from './lock.js';

export const AUDIT_CACHE = 'audit.json';
const CACHE_VERSION = 1;

/** Files ratchet or a scheduler writes beside a task's outputs: expected, never registered. */
export const BOOKKEEPING = /^(task\.json|run\.sh|stdout\.log|stderr\.log|exit\.json|runs\.log|check\.json|sample\.json|.*\.pid|slurm-.*\.out|.*\.(o|e)\d+|job\..*|exit-\d+\.json)$/;

export interface LedgerProblem {
  line: number;
  problem: string;
}

export interface AuditResult {
  campaign: string;
  ledger: { file: string; lines: number; events: number; last_seq: number; problems: LedgerProblem[]; torn?: { line: number; bytes: number } };
  /** Paths the ledger registered (latest registration of each). */
  registered: number;
  ok: number;
  missing: { path: string; id: string; seq: number }[];
  changed: { path: string; id: string; now: string; seq: number }[];
  /** Files under rounds/ outside any task folder that no artifact covers. */
  unregistered: { path: string; bytes: number }[];
  /** Files inside a task folder that no artifact covers and that are not ratchet's records: outputs no gate read (fine). */
  unread_outputs: { path: string; bytes: number }[];
  /** ratchet's and the scheduler's own records found (task.json, run.sh, logs, exit records, ...). */
  bookkeeping: number;
  /** Files read and hashed by this audit; the rest came from the cache (size and mtime unchanged). */
  hashed: number;
  from_cache: number;
  clean: boolean;
}

interface CacheEntry {
  size: number;
  mtime_ms: number;
  sha256: string;
  /** Directories: a digest of their files' (path, size, mtime). */
  sig?: string;
}

/** A folder under rounds/ as last listed: its mtime, its files other than task records, its sub-folders. */
interface DirEntry {
  mtime_ms: number;
  files: string[];
  dirs: string[];
  /** Task records in it (counted, not listed). */
  bookkeeping: number;
}

interface Cache {
  version: number;
  entries: Record<string, CacheEntry>;
  /** Folders under rounds/ (relative paths); a folder whose mtime is unchanged is not listed again. */
  dirs?: Record<string, DirEntry>;
}

export interface AuditOptions {
  /** Hash everything again, ignoring the cache. */
  full?: boolean;
  /** Write the cache (default true). */
  writeCache?: boolean;
  /** Files hashed at once (default 4). */
  workers?: number;
}

/** Read the ledger line by line, collecting problems instead of stopping at the first. */
export async function checkLedgerLines(file: string, onEvent: (e: Record<string, unknown>) => void): Promise<AuditResult['ledger']> {
  const out: AuditResult['ledger'] = { file, lines: 0, events: 0, last_seq: 0, problems: [] };
  let st;
  try {
    st = await fsp.stat(file);
  } catch {
    out.problems.push({ line: 0, problem: 'no ledger: the campaign has not run here, or .ratchet/ledger.jsonl was deleted' });
    return out;
  }
  // A last line not ended by a newline is a write cut short.
  let endsWithNewline = true;
  if (st.size > 0) {
    const fh = await fsp.open(file, 'r');
    try {
      const b = Buffer.alloc(1);
      await fh.read(b, 0, 1, st.size - 1);
      if (b[0] !== 0x0a) endsWithNewline = false;
    } finally {
      await fh.close();
    }
  }
  const rl = createInterface({ input: createReadStream(file), crlfDelay: Infinity });
  let expect = 1;
  let pendingLast: string | null = null;
  let n = 0;
  const take = (text: string, line: number): void => {
    if (text.trim() === '') return;
    let e: Record<string, unknown>;
    try {
      e = JSON.parse(text);
    } catch {
      out.problems.push({ line, problem: `not one JSON event: ${JSON.stringify(text.slice(0, 80))}` });
      return;
    }
    const seq = e && typeof e === 'object' ? e.seq : undefined;
    if (typeof seq !== 'number' || typeof e.type !== 'string') {
      out.problems.push({ line, problem: 'an event without a numeric "seq" and a string "type"' });
      return;
    }
    if (seq !== expect) {
      out.problems.push({
        line,
        problem: seq > expect ? `seq ${seq} follows seq ${expect - 1}: ${seq - expect} event(s) missing (lines removed?)` : `seq ${seq} repeats or goes back (after seq ${expect - 1}): the ledger was edited or written twice`,
      });
    }
    expect = Math.max(expect, seq + 1);
    out.last_seq = Math.max(out.last_seq, seq);
    out.events++;
    onEvent(e);
  };
  for await (const text of rl) {
    n++;
    if (pendingLast !== null) take(pendingLast, n - 1);
    pendingLast = text;
  }
  out.lines = n;
  if (pendingLast !== null) {
    if (!endsWithNewline) {
      out.torn = { line: n, bytes: Buffer.byteLength(pendingLast) };
      out.problems.push({ line: n, problem: `the last line was cut short (${out.torn.bytes} bytes without their newline): a write interrupted by a crash, or the file was truncated` });
    } else take(pendingLast, n);
  }
  return out;
}

async function readCache(dir: string): Promise<Cache> {
  try {
    const c = JSON.parse(await fsp.readFile(join(dir, RATCHET_DIR, AUDIT_CACHE), 'utf8')) as Cache;
    if (c && c.version === CACHE_VERSION && c.entries && typeof c.entries === 'object') return c;
  } catch {
    /* no cache, or unreadable: start afresh */
  }
  return { version: CACHE_VERSION, entries: {} };
}

async function writeCache(dir: string, cache: Cache): Promise<void> {
  const file = join(dir, RATCHET_DIR, AUDIT_CACHE);
  const tmp = `${file}.${process.pid}.tmp`;
  await fsp.writeFile(tmp, JSON.stringify(cache));
  await fsp.rename(tmp, file);
}

interface Walked {
  rel: string;
  size: number;
  mtime: number;
}

/** Every regular file or link below root (relative '/' paths); with size and mtime when `stat` (else -1). */
async function walk(root: string, prefix: string, out: Walked[], stat = true): Promise<void> {
  // Synchronous directory reads and stats: several times faster than promises for many small calls.
  let items;
  try {
    items = readdirSync(join(root, prefix), { withFileTypes: true });
  } catch {
    return;
  }
  for (const it of items) {
    const rel = prefix ? `${prefix}/${it.name}` : it.name;
    if (it.isDirectory()) await walk(root, rel, out, stat);
    else if (it.isFile() || it.isSymbolicLink()) {
      if (!stat) out.push({ rel, size: -1, mtime: -1 });
      else {
        const st = lstatSync(join(root, rel), { throwIfNoEntry: false });
        if (st) out.push({ rel, size: st.size, mtime: st.mtimeMs });
      }
    }
  }
}

/**
 * The files under rounds/ other than task records, listing again only folders whose mtime changed
 * (adding, removing or renaming an entry changes its folder's mtime). Counts the task records seen.
 */
function listRounds(root: string, prefix: string, old: Record<string, DirEntry>, fresh: Record<string, DirEntry>, out: string[], counts: { bookkeeping: number; listed: number }): void {
  const abs = prefix ? join(root, prefix) : root;
  const st = statSync(abs, { throwIfNoEntry: false });
  if (!st || !st.isDirectory()) return;
  let e = old[prefix];
  if (!e || e.mtime_ms !== st.mtimeMs) {
    counts.listed++;
    e = { mtime_ms: st.mtimeMs, files: [], dirs: [], bookkeeping: 0 };
    for (const it of readdirSync(abs, { withFileTypes: true })) {
      if (it.isDirectory()) e.dirs.push(it.name);
      else if (it.isFile() || it.isSymbolicLink()) {
        if (BOOKKEEPING.test(it.name)) e.bookkeeping++;
        else e.files.push(it.name);
      }
    }
  }
  fresh[prefix] = e;
  counts.bookkeeping += e.bookkeeping;
  for (const f of e.files) out.push(prefix ? `${prefix}/${f}` : f);
  for (const d of e.dirs) listRounds(root, prefix ? `${prefix}/${d}` : d, old, fresh, out, counts);
}

const SMALL = 4 << 20;

/** sha256 of a regular file: small files read at once (much faster than a stream), large ones streamed. */
async function hashRegular(path: string, size: number): Promise<string> {
  if (size < SMALL) return createHash('sha256').update(await fsp.readFile(path)).digest('hex');
  return (await hashFile(path)).sha256;
}

/** Audit a campaign directory (the directory holding .ratchet/). */
export async function auditCampaign(dir: string, opts: AuditOptions = {}): Promise<AuditResult> {
  // Only what the audit needs of each registration (keeps memory and garbage collection small).
  const byPath = new Map<string, Pick<ArtifactEvent, 'path' | 'id' | 'seq' | 'kind'>>();
  const ledger = await checkLedgerLines(ledgerPath(dir), (e) => {
    if (e.type === 'artifact' && typeof e.path === 'string' && typeof e.id === 'string') {
      byPath.set(e.path, { path: e.path, id: e.id, seq: e.seq as number, kind: e.kind as ArtifactEvent['kind'] });
    }
  });
  const cache = opts.full ? { version: CACHE_VERSION, entries: {} as Record<string, CacheEntry> } : await readCache(dir);
  const old = cache.entries;
  const fresh: Record<string, CacheEntry> = {};
  const res: AuditResult = {
    campaign: dir,
    ledger,
    registered: byPath.size,
    ok: 0,
    missing: [],
    changed: [],
    unregistered: [],
    unread_outputs: [],
    bookkeeping: 0,
    hashed: 0,
    from_cache: 0,
    clean: false,
  };

  // Everything under rounds/ once: it serves directory signatures and the unregistered scan.
  // Only names here (size is looked up for the few files no artifact covers); folders unchanged since
  // the last audit are not listed again.
  const names: string[] = [];
  const freshDirs: Record<string, DirEntry> = {};
  const counts = { bookkeeping: 0, listed: 0 };
  listRounds(join(dir, 'rounds'), '', cache.dirs ?? {}, freshDirs, names, counts);
  res.bookkeeping = counts.bookkeeping;
  const files: Walked[] = names.map((n) => ({ rel: `rounds/${n}`, size: -1, mtime: -1 }));

  const dirPaths = new Set([...byPath.values()].filter((a) => a.kind === 'dir').map((a) => a.path));
  const underDir = (p: string): boolean => {
    for (let i = p.lastIndexOf('/'); i > 0; i = p.lastIndexOf('/', i - 1)) if (dirPaths.has(p.slice(0, i))) return true;
    return false;
  };

  const jobs = [...byPath.values()];
  let next = 0;
  const worker = async (): Promise<void> => {
    while (next < jobs.length) {
      const a = jobs[next++];
      const abs = join(dir, a.path);
      const st = statSync(abs, { throwIfNoEntry: false });
      if (!st) {
        res.missing.push({ path: a.path, id: a.id, seq: a.seq });
        continue;
      }
      let sha: string;
      const prev = old[a.path];
      if (st.isDirectory()) {
        const inner: Walked[] = [];
        await walk(abs, '', inner);
        inner.sort((x, y) => (x.rel < y.rel ? -1 : x.rel > y.rel ? 1 : 0));
        const sig = createHash('sha256')
          .update(inner.map((f) => `${f.rel}\t${f.size}\t${f.mtime}`).join('\n'))
          .digest('hex');
        if (prev && prev.sig === sig) {
          sha = prev.sha256;
          res.from_cache += inner.length;
        } else {
          sha = (await hashArtifact(abs)).sha256;
          res.hashed += inner.length;
        }
        fresh[a.path] = { size: st.size, mtime_ms: st.mtimeMs, sha256: sha, sig };
      } else {
        if (prev && prev.size === st.size && prev.mtime_ms === st.mtimeMs && !prev.sig) {
          sha = prev.sha256;
          res.from_cache++;
        } else {
          sha = await hashRegular(abs, st.size);
          res.hashed++;
        }
        fresh[a.path] = { size: st.size, mtime_ms: st.mtimeMs, sha256: sha };
      }
      if (sha === idHex(a.id)) res.ok++;
      else res.changed.push({ path: a.path, id: a.id, now: 'sha256:' + sha, seq: a.seq });
    }
  };
  await Promise.all(Array.from({ length: Math.max(1, opts.workers ?? 4) }, worker));

  for (const f of files) {
    if (byPath.has(f.rel) || underDir(f.rel)) continue;
    f.size = (await fsp.lstat(join(dir, f.rel)).catch(() => null))?.size ?? 0;
    // rounds/rK/<stage>/<task>/... is a task's folder.
    const parts = f.rel.split('/');
    if (parts.length >= 5) res.unread_outputs.push({ path: f.rel, bytes: f.size });
    else res.unregistered.push({ path: f.rel, bytes: f.size });
  }
  const order = (x: { path: string }, y: { path: string }) => (x.path < y.path ? -1 : x.path > y.path ? 1 : 0);
  res.missing.sort(order);
  res.changed.sort(order);
  res.unregistered.sort(order);
  res.unread_outputs.sort(order);
  res.clean = ledger.problems.length === 0 && res.missing.length === 0 && res.changed.length === 0 && res.unregistered.length === 0;
  if (opts.writeCache ?? true) {
    try {
      await writeCache(dir, { version: CACHE_VERSION, entries: fresh, dirs: freshDirs });
    } catch {
      /* a read-only campaign folder: audit still answers, only not incrementally next time */
    }
  }
  return res;
}

/** The audit as text: problems first, then what was checked. */
export function renderAudit(r: AuditResult): string {
  const L: string[] = [];
  L.push(`audit of ${r.campaign}`);
  const lg = r.ledger;
  L.push(`ledger: ${lg.events} event(s) on ${lg.lines} line(s), last seq ${lg.last_seq}${lg.problems.length ? `, ${lg.problems.length} problem(s)` : ', intact'}`);
  for (const p of lg.problems) L.push(`  ${lg.file}:${p.line}: ${p.problem}`);
  L.push(`artifacts: ${r.registered} registered path(s): ${r.ok} unchanged, ${r.changed.length} changed, ${r.missing.length} missing`);
  for (const m of r.missing) L.push(`  missing  ${m.path}  (registered as ${m.id.slice(0, 19)}, ledger seq ${m.seq})`);
  for (const c of r.changed) L.push(`  changed  ${c.path}  (registered ${c.id.slice(0, 19)}, now ${c.now.slice(0, 19)}, ledger seq ${c.seq})`);
  L.push(`files under rounds/ never registered: ${r.unregistered.length}${r.unregistered.length ? ' (not written by any task: added by hand or by another program?)' : ''}`);
  for (const u of r.unregistered) L.push(`  stray    ${u.path}  (${u.bytes} bytes)`);
  if (r.unread_outputs.length) {
    L.push(`task outputs no gate read (fine): ${r.unread_outputs.length}`);
    for (const u of r.unread_outputs.slice(0, 20)) L.push(`  output   ${u.path}`);
    if (r.unread_outputs.length > 20) L.push(`  ... and ${r.unread_outputs.length - 20} more`);
  }
  L.push(`task records (task.json, run.sh, logs, exit records; expected, not registered): ${r.bookkeeping}`);
  L.push(`hashed ${r.hashed} file(s); ${r.from_cache} unchanged since the last audit (size and mtime) taken from ${RATCHET_DIR}/${AUDIT_CACHE}`);
  L.push(r.clean ? 'clean' : 'NOT clean');
  return L.join('\n') + '\n';
}
