/**
 * `ratchet lineage` behind the CLI: find the campaign, resolve a path or artifact id against the
 * ledger (hashing the file as it is now), build the tree, render it as text or JSON.
 * Read-only: never takes the lock.
 */
import { promises as fsp } from 'node:fs';
import { dirname, isAbsolute, join, relative, resolve, sep } from 'node:path';
import { readFrames } from '../atoms/xyz/reader.js';
import { hashArtifact, idHex, isArtifactId, shortId, type ArtifactEvent } from './artifacts.js';
import { foldLedger, LedgerError } from './journal.js';
import { RATCHET_DIR } from './lock.js';
import {
  addToLineage,
  downstream,
  emptyLineageGraph,
  frameUpstream,
  upstream,
  type FrameSource,
  type FrameTrace,
  type LineageGraph,
  type LineageNode,
} from './lineage.js';
import { identityProblem } from '../engine/identity.js';

/** A lineage question that cannot be answered: bad input or nothing found (exit 2). */
export class LineageQueryError extends Error {
  override name = 'LineageQueryError';
  constructor(message: string, readonly exitCode = 2) {
    super(message);
  }
}

/** The nearest directory at or above `start` that holds `.ratchet/`, or null. */
export async function findCampaignDir(start: string): Promise<string | null> {
  let dir = resolve(start);
  try {
    if (!(await fsp.stat(dir)).isDirectory()) dir = dirname(dir);
  } catch {
    dir = dirname(dir);
  }
  for (;;) {
    try {
      if ((await fsp.stat(join(dir, RATCHET_DIR))).isDirectory()) return dir;
    } catch {
      /* keep walking */
    }
    const up = dirname(dir);
    if (up === dir) return null;
    dir = up;
  }
}

export interface LineageRequest {
  /** A path (file or directory) or an artifact id ("sha256:<hex>" or a unique hex prefix of 6+ digits). */
  target: string;
  /**
   * The campaign file, or its directory; default: walk up from the path (or the working directory for
   * an id). A campaign file must be the one that owns the folder's state (one state per campaign file).
   */
  campaign?: string;
  /** Downstream instead of upstream. */
  down?: boolean;
  /** Follow one frame (0-based index) of the target back through frame-selection files. */
  frame?: number;
  maxDepth?: number;
  cwd?: string;
}

export interface LineageAnswer {
  campaign: string;
  target: string;
  direction: 'upstream' | 'downstream';
  artifact: string;
  tree: LineageNode;
  frame?: FrameTrace;
  /** The campaign file that owns this folder's state, as the ledger records it (relative to the folder). */
  campaign_file?: string;
  /** Plain-words remarks (torn ledger tail, file registered elsewhere, unreadable selection file). */
  notes: string[];
}

const XYZ_RE = /\.(ext)?xyz(\.gz)?$/i;

/** Answer a lineage request; throws LineageQueryError (exit 2) when nothing is found. */
export async function lineageQuery(req: LineageRequest): Promise<LineageAnswer> {
  const cwd = req.cwd ?? process.cwd();
  const notes: string[] = [];
  const looksLikeId = /^(sha256:)?[0-9a-f]{6,64}$/i.test(req.target);
  const exists = (p: string): Promise<boolean> =>
    fsp
      .stat(p)
      .then(() => true)
      .catch(() => false);
  let abs = resolve(cwd, req.target);
  let pathExists = await exists(abs);
  // With --campaign, a relative path that is not there from here is taken relative to the campaign.
  if (!pathExists && req.campaign !== undefined && !isAbsolute(req.target)) {
    const inCampaign = resolve(cwd, req.campaign, req.target);
    if (!looksLikeId || (await exists(inCampaign))) {
      abs = inCampaign;
      pathExists = await exists(abs);
    }
  }
  const asId = looksLikeId && (req.target.startsWith('sha256:') || !pathExists);

  let campaign: string | null;
  let campaignFile: string | undefined;
  if (req.campaign !== undefined) {
    campaign = resolve(cwd, req.campaign);
    if (await isFile(campaign)) {
      campaignFile = campaign;
      campaign = dirname(campaign);
      if (!pathExists && !isAbsolute(req.target) && !looksLikeId) {
        // A relative path not found from here is taken relative to the campaign's folder.
        abs = resolve(campaign, req.target);
        pathExists = await exists(abs);
      }
    }
    if (!(await isDir(join(campaign, RATCHET_DIR)))) {
      throw new LineageQueryError(`${campaign}: no ${RATCHET_DIR}/ directory here: not a campaign directory that has run (expected --campaign to name the directory holding the campaign's ${RATCHET_DIR}/)`);
    }
  } else {
    campaign = await findCampaignDir(asId ? cwd : abs);
    if (!campaign) {
      throw new LineageQueryError(
        `${asId ? cwd : abs}: no ${RATCHET_DIR}/ directory found here or above; pass --campaign DIR (the directory of the campaign file that ran)`,
      );
    }
  }

  let graph: LineageGraph;
  let identity: { name: string; file: string; path: string } | undefined;
  try {
    const r = await foldLedger(
      campaign,
      (g: LineageGraph, e) => {
        if (identity === undefined && e.type === 'campaign_identity' && typeof e.file === 'string') identity = e as unknown as typeof identity;
        return addToLineage(g, e);
      },
      emptyLineageGraph(),
    );
    graph = r.state;
    if (r.torn) notes.push(`the ledger's last line (line ${r.torn.line}) is incomplete (a crash or a write in progress) and was skipped`);
  } catch (err) {
    if (err instanceof LedgerError) throw new LineageQueryError(err.message);
    throw err;
  }
  // One state per campaign file: another campaign file's folder holds no lineage of it.
  if (campaignFile !== undefined) {
    const problem = identityProblem({ dir: campaign, file: campaignFile, name: '' }, identity);
    if (problem) throw new LineageQueryError(problem);
  }
  if (graph.byId.size === 0) throw new LineageQueryError(`${campaign}: the ledger records no artifacts yet`);

  // Resolve the target to an artifact id.
  let id: string;
  if (asId) {
    id = resolveIdPrefix(graph, req.target);
  } else {
    const rel = relative(campaign, abs).split(sep).join('/');
    if (rel.startsWith('..') || isAbsolute(rel)) {
      throw new LineageQueryError(`${abs}: lies outside the campaign directory ${campaign}`);
    }
    if (pathExists) {
      const h = await hashArtifact(abs);
      const here = 'sha256:' + h.sha256;
      const registered = graph.byId.get(here);
      if (registered) {
        id = here;
        if (registered.path !== rel && !(graph.registrations.get(here) ?? []).some((r) => r.path === rel)) {
          notes.push(`this content was registered as ${registered.path}; ${rel} is a copy of it`);
        }
      } else {
        const atPath = graph.byPath.get(rel);
        const why =
          `${abs}: this file's content is not recorded: it was modified after ratchet registered it, or never registered\n` +
          `  content now:  ${here}`;
        throw new LineageQueryError(
          atPath ? `${why}\n  registered:   ${atPath.id} at this path (ledger seq ${atPath.seq}, ${atPath.at})` : why,
        );
      }
    } else {
      const atPath = graph.byPath.get(rel);
      if (!atPath) throw new LineageQueryError(`${abs}: no such file, and the ledger records nothing at ${rel}`);
      id = atPath.id;
      notes.push(`${rel} no longer exists; showing what the ledger recorded there`);
    }
  }

  const art = graph.byId.get(id) as ArtifactEvent;
  const frameSources = new Map<string, string[]>();
  if (!req.down && !Array.isArray(art.frame_sources) && XYZ_RE.test(art.path)) {
    try {
      const srcs = await distinctFrameSources(join(campaign, art.path));
      if (srcs.length) frameSources.set(id, srcs);
    } catch (err) {
      notes.push(`could not read frame sources of ${art.path}: ${(err as Error).message}`);
    }
  }
  const opts = { maxDepth: req.maxDepth, frameSources };
  const tree = (req.down ? downstream(graph, id, opts) : upstream(graph, id, opts)) as LineageNode;
  const answer: LineageAnswer = {
    campaign,
    target: req.target,
    direction: req.down ? 'downstream' : 'upstream',
    artifact: id,
    tree,
    ...(identity ? { campaign_file: identity.file } : {}),
    notes,
  };
  if (req.frame !== undefined) {
    answer.frame = await frameUpstream(graph, id, req.frame, (a, f) => readFrameSource(join(campaign as string, a.path), f));
  }
  return answer;
}

async function isFile(p: string): Promise<boolean> {
  return fsp
    .stat(p)
    .then((s) => s.isFile())
    .catch(() => false);
}

async function isDir(p: string): Promise<boolean> {
  return fsp
    .stat(p)
    .then((s) => s.isDirectory())
    .catch(() => false);
}

function resolveIdPrefix(g: LineageGraph, target: string): string {
  const hex = idHex(target.toLowerCase());
  if (isArtifactId('sha256:' + hex)) {
    if (g.byId.has('sha256:' + hex)) return 'sha256:' + hex;
    throw new LineageQueryError(`artifact sha256:${hex} is not recorded in this campaign's ledger`);
  }
  const hits = [...g.byId.keys()].filter((k) => idHex(k).startsWith(hex));
  if (hits.length === 1) return hits[0];
  if (hits.length === 0) throw new LineageQueryError(`no recorded artifact id starts with ${hex}`);
  throw new LineageQueryError(
    `${hex} is ambiguous: it starts ${hits.length} artifact ids (${hits.slice(0, 5).map(shortId).join(', ')}${hits.length > 5 ? ', ...' : ''}); give more digits`,
  );
}

function sourceOf(info: Map<string, unknown>): FrameSource | null {
  const a = info.get('source_artifact');
  const f = info.get('source_frame');
  if (typeof a !== 'string' || typeof f !== 'number') return null;
  return { source_artifact: a.startsWith('sha256:') ? a : 'sha256:' + a, source_frame: f };
}

/** The distinct `source_artifact` values of an extended XYZ file's frames, in first-seen order. */
export async function distinctFrameSources(path: string): Promise<string[]> {
  const seen = new Set<string>();
  let first = true;
  for await (const fr of readFrames(path, { columns: [] })) {
    const s = sourceOf(fr.info);
    // A file whose first frame has no source keys is not a frame selection (e.g. a trajectory): stop
    // at once instead of reading it all.
    if (first && !s) return [];
    first = false;
    if (s) seen.add(s.source_artifact);
  }
  return [...seen];
}

/** The source keys of frame `index` (0-based) of an extended XYZ file, null when it has none. */
export async function readFrameSource(path: string, index: number): Promise<FrameSource | null> {
  let i = 0;
  for await (const fr of readFrames(path, { columns: [] })) {
    if (i++ === index) return sourceOf(fr.info);
  }
  throw new Error(`${path}: has ${i} frames, no frame ${index}`);
}

// ---------------------------------------------------------------- text rendering

function nodeHead(n: LineageNode): string {
  const id = `${shortId(n.id)}`;
  if (n.status === 'not_recorded') return `? ${id}  not recorded in the ledger`;
  const rel = n.relation === 'frame_source' ? ' (frames from)' : '';
  const ref = n.ref === 'repeat' ? '  (shown above)' : n.ref === 'cycle' ? '  (cycle: leads back to itself)' : '';
  return `${n.role ?? '?'}${rel}  ${id}  ${n.path ?? ''}${ref}`;
}

function nodeDetail(n: LineageNode): string[] {
  if (n.status !== 'recorded' || n.ref) return [];
  const out: string[] = [];
  if (n.task) {
    const bits: string[] = [];
    if (n.task.campaign_sha256) bits.push(`campaign ${n.task.campaign_sha256.slice(0, 12)}`);
    if (n.task.tool_version) bits.push(`ratchet ${n.task.tool_version}`);
    if (n.task.state) bits.push(n.task.state);
    out.push(`task ${n.task.id}${n.task.command ? `: ${oneLine(n.task.command)}` : ''}${bits.length ? `  (${bits.join(', ')})` : ''}`);
    const progs = Object.entries(n.task.programs ?? {});
    if (progs.length) out.push(`programs: ${progs.map(([p, id]) => `${p} ${shortId(id)}`).join(', ')}`);
  } else if (n.children.length === 0 && !n.truncated) {
    out.push('given to the campaign (no producing task)');
  }
  if (n.also?.length) {
    const shown = n.also.slice(0, 3).map((a) => `${a.path}${a.task ? ` (task ${a.task})` : ''}`);
    out.push(`same content also registered at ${shown.join(', ')}${n.also.length > 3 ? `, and ${n.also.length - 3} more` : ''}`);
  }
  if (n.truncated) out.push('... (depth limit)');
  return out;
}

function oneLine(s: string): string {
  const t = s.replace(/\s*\n\s*/g, ' ⏎ ');
  return t.length > 120 ? t.slice(0, 117) + '...' : t;
}

/** An indented tree: one artifact per line (role, short hash, path) with its producing task beneath. */
export function renderTree(root: LineageNode): string {
  const lines: string[] = [];
  const walk = (n: LineageNode, lead: string, branch: string, childLead: string): void => {
    lines.push(lead + branch + nodeHead(n));
    const kids = n.children;
    const detailLead = childLead + (kids.length ? '│ ' : '  ');
    for (const d of nodeDetail(n)) lines.push(detailLead + d);
    kids.forEach((c, i) => {
      const last = i === kids.length - 1;
      walk(c, childLead, last ? '└── ' : '├── ', childLead + (last ? '    ' : '│   '));
    });
  };
  walk(root, '', '', '');
  return lines.map((l) => l.replace(/\s+$/, '')).join('\n') + '\n';
}

export function renderFrameTrace(t: FrameTrace): string {
  const lines = t.steps.map((s, i) =>
    `${'  '.repeat(i)}${i ? '<- ' : ''}frame ${s.frame} of ${s.status === 'recorded' ? `${s.role} ${shortId(s.artifact)} ${s.path}${s.task ? ` (task ${s.task})` : ''}` : `${shortId(s.artifact)} (not recorded in the ledger)`}`,
  );
  const end: Record<FrameTrace['end'], string> = {
    origin: 'an original frame: it carries no source_artifact/source_frame keys',
    not_recorded: 'its source artifact is not recorded in the ledger',
    cycle: 'the frame sources form a cycle',
    unreadable: `could not read the file: ${t.message ?? ''}`,
  };
  lines.push(`${'  '.repeat(t.steps.length)}(${end[t.end]})`);
  return lines.join('\n') + '\n';
}

/** The whole text answer (tree, optional frame trace, notes). */
export function renderAnswer(a: LineageAnswer): string {
  let s = `${a.direction} of ${a.artifact} in ${a.campaign}${a.campaign_file ? ` (campaign file ${a.campaign_file})` : ''}\n` + renderTree(a.tree);
  if (a.frame) s += '\nframe lineage:\n' + renderFrameTrace(a.frame);
  for (const n of a.notes) s += `note: ${n}\n`;
  return s;
}
