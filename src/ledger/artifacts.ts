/**
 * Artifacts: registered files and directories named by the sha256 of their content.
 *
 * A file's hash is the plain sha256 of its bytes (the same as `sha256sum FILE`), read as a stream in
 * constant memory. A directory's hash is the sha256 of a manifest text:
 *
 *     ratchet-dir-v1\n
 *     then one line per entry below the directory, sorted by relative path (UTF-8 byte order, '/' separators):
 *       "f <sha256 of the file> <-|x> <relative path>\n"   regular file; x = executable by its owner
 *       "l <sha256 of the link target text> - <relative path>\n"   symbolic link (not followed)
 *
 * Included: every regular file's content and owner-executable bit, every symlink's target text, and
 * the relative paths. Not included: names of the top directory itself, timestamps, owners, other
 * permission bits, and empty directories (like git, a directory exists only through what it holds).
 * Other kinds (sockets, FIFOs, devices) are refused with an error naming the path.
 */
import { createHash } from 'node:crypto';
import { createReadStream, promises as fsp } from 'node:fs';
import { isAbsolute, join, relative, resolve, sep } from 'node:path';
import { VERSION } from '../version.js';
import type { LedgerEvent, NewEvent } from './journal.js';

export type ArtifactKind = 'file' | 'dir';

export interface ArtifactHash {
  /** Lower-case hex sha256. */
  sha256: string;
  /** File size, or for a directory the total size of its regular files. */
  bytes: number;
  kind: ArtifactKind;
}

export interface HashOptions {
  /** Leave out entries of a directory whose relative path ('/'-separated) this returns true for. */
  ignore?: (relPath: string) => boolean;
}

export const ARTIFACT_PREFIX = 'sha256:';
const DIR_MANIFEST_HEADER = 'ratchet-dir-v1\n';

/** "sha256:<hex>" for a hex digest. */
export function artifactId(sha256: string): string {
  return ARTIFACT_PREFIX + sha256;
}

/** True for "sha256:" followed by 64 lower-case hex digits. */
export function isArtifactId(s: string): boolean {
  return /^sha256:[0-9a-f]{64}$/.test(s);
}

/** The hex digest of an id ("sha256:<hex>" or bare hex). */
export function idHex(id: string): string {
  return id.startsWith(ARTIFACT_PREFIX) ? id.slice(ARTIFACT_PREFIX.length) : id;
}

/** The first 12 hex digits, for display. */
export function shortId(id: string): string {
  return idHex(id).slice(0, 12);
}

/** Stream a regular file through sha256 in constant memory. */
export async function hashFile(path: string): Promise<{ sha256: string; bytes: number }> {
  const h = createHash('sha256');
  let bytes = 0;
  for await (const chunk of createReadStream(path, { highWaterMark: 1 << 20 }) as AsyncIterable<Buffer>) {
    h.update(chunk);
    bytes += chunk.length;
  }
  return { sha256: h.digest('hex'), bytes };
}

/** Hash a file or directory (see the module comment for what a directory hash covers). */
export async function hashArtifact(path: string, opts: HashOptions = {}): Promise<ArtifactHash> {
  const st = await fsp.stat(path);
  if (st.isFile()) return { ...(await hashFile(path)), kind: 'file' };
  if (st.isDirectory()) return hashDirectory(path, opts);
  throw new Error(`${path}: cannot register as an artifact: not a regular file or directory`);
}

interface Entry {
  rel: string;
  relBytes: Buffer;
  abs: string;
  kind: 'f' | 'l';
}

async function listEntries(root: string, opts: HashOptions): Promise<Entry[]> {
  const out: Entry[] = [];
  const walk = async (dir: string, prefix: string): Promise<void> => {
    const items = await fsp.readdir(dir, { withFileTypes: true });
    for (const it of items) {
      const rel = prefix ? `${prefix}/${it.name}` : it.name;
      if (opts.ignore?.(rel)) continue;
      const abs = join(dir, it.name);
      if (it.isDirectory()) await walk(abs, rel);
      else if (it.isFile()) out.push({ rel, relBytes: Buffer.from(rel, 'utf8'), abs, kind: 'f' });
      else if (it.isSymbolicLink()) out.push({ rel, relBytes: Buffer.from(rel, 'utf8'), abs, kind: 'l' });
      else throw new Error(`${abs}: cannot hash a directory holding a socket, FIFO or device file`);
    }
  };
  await walk(root, '');
  out.sort((a, b) => Buffer.compare(a.relBytes, b.relBytes));
  return out;
}

async function hashDirectory(root: string, opts: HashOptions): Promise<ArtifactHash> {
  const entries = await listEntries(root, opts);
  const manifest = createHash('sha256');
  manifest.update(DIR_MANIFEST_HEADER);
  let bytes = 0;
  // Files are hashed a few at a time; manifest lines are added in sorted order.
  const width = 4;
  const lines: string[] = new Array(entries.length);
  let next = 0;
  const worker = async (): Promise<void> => {
    while (next < entries.length) {
      const i = next++;
      const e = entries[i];
      if (e.kind === 'f') {
        const [{ sha256, bytes: b }, st] = await Promise.all([hashFile(e.abs), fsp.stat(e.abs)]);
        bytes += b;
        lines[i] = `f ${sha256} ${st.mode & 0o100 ? 'x' : '-'} ${e.rel}\n`;
      } else {
        const target = await fsp.readlink(e.abs);
        lines[i] = `l ${createHash('sha256').update(target).digest('hex')} - ${e.rel}\n`;
      }
    }
  };
  await Promise.all(Array.from({ length: Math.min(width, entries.length) }, worker));
  for (const l of lines) manifest.update(l);
  return { sha256: manifest.digest('hex'), bytes, kind: 'dir' };
}

/** Stage roles the engine uses; any other string is allowed too. */
export type ArtifactRole =
  | 'start'
  | 'sampled'
  | 'labeled'
  | 'training_set'
  | 'model'
  | 'validation'
  | 'trajectory'
  | 'selected'
  | (string & {});

/** The fields of an artifact event (the brief's contract; the engine may add more, e.g. round, stage). */
export type ArtifactFields = {
  type: 'artifact';
  /** "sha256:<hex>" */
  id: string;
  /** Path relative to the campaign directory, '/'-separated. */
  path: string;
  role: ArtifactRole;
  /** Producing task id ("r0/label/0003"); absent for start structures and other given inputs. */
  task?: string;
  /** Artifact ids this was made from. */
  inputs: string[];
  command?: string;
  campaign_sha256: string;
  tool_version: string;
  kind?: ArtifactKind;
  bytes?: number;
  /** For a frame selection: the distinct source artifacts its frames came from (optional). */
  frame_sources?: string[];
};

/** An artifact event ready for Journal.append. */
export type NewArtifactEvent = ArtifactFields & NewEvent;

/** The artifact event as recorded in the ledger (with seq and at). */
export type ArtifactEvent = ArtifactFields & LedgerEvent;

export interface ArtifactEventInput {
  campaignDir: string;
  /** Absolute, or relative to the campaign directory. */
  path: string;
  role: ArtifactRole;
  task?: string;
  inputs?: string[];
  command?: string;
  campaign_sha256: string;
  /** Default: this package's version. */
  tool_version?: string;
  /** Precomputed hash (skips hashing). */
  hash?: ArtifactHash;
  hashOptions?: HashOptions;
  frame_sources?: string[];
  /** Extra fields copied into the event. */
  extra?: Record<string, unknown>;
}

/** Path relative to the campaign dir with '/' separators (throws if outside it). */
export function campaignRelative(campaignDir: string, path: string): string {
  const abs = isAbsolute(path) ? path : resolve(campaignDir, path);
  const rel = relative(resolve(campaignDir), abs);
  if (rel === '' || rel.startsWith('..') || isAbsolute(rel)) {
    throw new Error(`${abs}: an artifact must lie inside the campaign directory ${campaignDir}`);
  }
  return rel.split(sep).join('/');
}

/**
 * Hash a file or directory and build its artifact event (to pass to Journal.append).
 * Input ids are checked for shape, not for registration (lineage reports unregistered ones).
 */
export async function artifactEvent(a: ArtifactEventInput): Promise<NewArtifactEvent> {
  const rel = campaignRelative(a.campaignDir, a.path);
  const h = a.hash ?? (await hashArtifact(resolve(a.campaignDir, rel), a.hashOptions));
  const inputs = a.inputs ?? [];
  for (const id of inputs) {
    if (!isArtifactId(id)) throw new Error(`artifact ${rel}: input "${id}" is not an artifact id (expected sha256:<64 hex digits>)`);
  }
  const ev: NewArtifactEvent = {
    type: 'artifact',
    id: artifactId(h.sha256),
    path: rel,
    role: a.role,
    ...(a.task !== undefined ? { task: a.task } : {}),
    inputs: [...inputs],
    ...(a.command !== undefined ? { command: a.command } : {}),
    campaign_sha256: a.campaign_sha256,
    tool_version: a.tool_version ?? VERSION,
    kind: h.kind,
    bytes: h.bytes,
    ...(a.frame_sources ? { frame_sources: [...a.frame_sources] } : {}),
    ...(a.extra ?? {}),
  };
  return ev;
}

export function isArtifactEvent(e: { type: string }): e is ArtifactEvent {
  return e.type === 'artifact';
}

/** Lookup tables over the artifact events of a ledger. */
export interface ArtifactIndex {
  /** First registration of each id (the original producer). */
  byId: Map<string, ArtifactEvent>;
  /** Every registration of each id, in ledger order (same content can be registered more than once). */
  registrations: Map<string, ArtifactEvent[]>;
  /** Latest registration at each path. */
  byPath: Map<string, ArtifactEvent>;
  /** Artifacts produced by each task, in ledger order. */
  byTask: Map<string, ArtifactEvent[]>;
  /** Artifacts that list each id among their inputs (downstream edges). */
  consumers: Map<string, ArtifactEvent[]>;
}

export function emptyArtifactIndex(): ArtifactIndex {
  return { byId: new Map(), registrations: new Map(), byPath: new Map(), byTask: new Map(), consumers: new Map() };
}

/** Add one event to an index (a reducer for foldLedger); non-artifact events are ignored. */
export function indexArtifact(ix: ArtifactIndex, e: LedgerEvent): ArtifactIndex {
  if (e.type !== 'artifact') return ix;
  const a = e as ArtifactEvent;
  if (typeof a.id !== 'string') return ix;
  if (!ix.byId.has(a.id)) ix.byId.set(a.id, a);
  push(ix.registrations, a.id, a);
  if (typeof a.path === 'string') ix.byPath.set(a.path, a);
  if (typeof a.task === 'string') push(ix.byTask, a.task, a);
  if (Array.isArray(a.inputs)) {
    const ins = a.inputs;
    for (let k = 0; k < ins.length; k++) {
      const i = ins[k];
      if (typeof i === 'string' && ins.indexOf(i) === k) push(ix.consumers, i, a); // once per distinct input
    }
  }
  return ix;
}

/** Build an index from a list of ledger events. */
export function indexArtifacts(events: Iterable<LedgerEvent>): ArtifactIndex {
  const ix = emptyArtifactIndex();
  for (const e of events) indexArtifact(ix, e);
  return ix;
}

function push<K, V>(m: Map<K, V[]>, k: K, v: V): void {
  const l = m.get(k);
  if (l) l.push(v);
  else m.set(k, [v]);
}
