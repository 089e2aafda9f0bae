/**
 * Lineage: the graph of artifacts and the tasks that made them, as recorded in the ledger.
 *
 * upstream(): what made this artifact: its producing task (command, campaign hash, tool version),
 * that task's input artifacts, theirs, ... back to artifacts no task produced (start structures).
 * downstream(): what was made from it.
 *
 * Pure functions over ledger events. Robust to imperfect ledgers: an input id that was never
 * registered is a node with status 'not_recorded'; a cycle (impossible for content hashes, but a
 * hand-edited ledger can hold one) is cut and marked; an artifact reached a second time is shown
 * once in full and then as a reference, so a deep DAG stays linear in size.
 *
 * Frames: a frame-selection file carries per-frame info keys `source_artifact` and `source_frame`.
 * An artifact event may list the distinct source artifacts of its frames in `frame_sources`; callers
 * that read the file can pass the same through `frameSources`. frameUpstream() follows one frame
 * back through such files, one hop at a time, with a caller-supplied reader.
 */
import {
  indexArtifact,
  emptyArtifactIndex,
  isArtifactId,
  type ArtifactEvent,
  type ArtifactIndex,
} from './artifacts.js';
import type { LedgerEvent } from './journal.js';

/** What the ledger says about a task, gathered from its task events (any event with a string `task`). */
export interface TaskInfo {
  id: string;
  command?: string;
  campaign_sha256?: string;
  tool_version?: string;
  /** Latest recorded `state` of the task, if task events carry one. */
  state?: string;
  /**
   * The programs its latest attempt ran (task_submitted.programs): path as written in the campaign ->
   * "sha256:<hex>" of the file or folder when the attempt started.
   */
  programs?: Record<string, string>;
  /** Number of task events seen for it. */
  events: number;
}

/** The artifact index plus what task events say. Build once with lineageGraph() and query many times. */
export interface LineageGraph extends ArtifactIndex {
  tasks: Map<string, TaskInfo>;
  /** Artifacts that name each id in their `frame_sources` (downstream edges of frame selections). */
  frameConsumers: Map<string, ArtifactEvent[]>;
}

export function emptyLineageGraph(): LineageGraph {
  return { ...emptyArtifactIndex(), tasks: new Map(), frameConsumers: new Map() };
}

/** Reducer for foldLedger: adds one event to a lineage graph. */
export function addToLineage(g: LineageGraph, e: LedgerEvent): LineageGraph {
  if (e.type === 'artifact') {
    indexArtifact(g, e);
    const fs = (e as ArtifactEvent).frame_sources;
    if (Array.isArray(fs) && typeof e.id === 'string') {
      for (const src of new Set(fs)) {
        if (typeof src !== 'string') continue;
        const l = g.frameConsumers.get(src);
        if (l) l.push(e as ArtifactEvent);
        else g.frameConsumers.set(src, [e as ArtifactEvent]);
      }
    }
    return g;
  }
  const taskId = e.task;
  if (typeof taskId === 'string') {
    let t = g.tasks.get(taskId);
    if (!t) g.tasks.set(taskId, (t = { id: taskId, events: 0 }));
    t.events++;
    if (typeof e.command === 'string') t.command = e.command;
    if (typeof e.campaign_sha256 === 'string') t.campaign_sha256 = e.campaign_sha256;
    if (typeof e.tool_version === 'string') t.tool_version = e.tool_version;
    if (typeof e.state === 'string') t.state = e.state;
    if (e.type === 'task_submitted') {
      // Each attempt says what it ran; an attempt without programs (none listed) clears an earlier one's.
      const p = e.programs;
      if (p && typeof p === 'object' && !Array.isArray(p)) t.programs = { ...(p as Record<string, string>) };
      else delete t.programs;
    }
  }
  return g;
}

export function lineageGraph(events: Iterable<LedgerEvent>): LineageGraph {
  const g = emptyLineageGraph();
  for (const e of events) addToLineage(g, e);
  return g;
}

export type Relation = 'input' | 'frame_source' | 'product';

export interface LineageNode {
  /** Artifact id ("sha256:<hex>"). */
  id: string;
  /** 'not_recorded': referenced as an input but never registered in this ledger. */
  status: 'recorded' | 'not_recorded';
  /** How this node relates to its parent in the tree (absent at the root). */
  relation?: Relation;
  /** 'repeat': already shown in full elsewhere in this tree; 'cycle': leads back to one of its own ancestors. */
  ref?: 'repeat' | 'cycle';
  /** Cut because the depth limit was reached while it still had neighbours. */
  truncated?: boolean;
  role?: string;
  path?: string;
  kind?: string;
  bytes?: number;
  /** Producing task; absent for artifacts given to the campaign (start structures). */
  task?: TaskInfo;
  /** The ledger seq of the registration shown. */
  seq?: number;
  /** Other paths/tasks under which the same content was registered. */
  also?: Array<{ path: string; task?: string; seq: number }>;
  children: LineageNode[];
}

export interface LineageOptions {
  /** Stop expanding below this depth (root = 0). Default: unlimited. */
  maxDepth?: number;
  /** Extra frame sources per artifact id (e.g. read from the selection file's source_artifact keys). */
  frameSources?: Map<string, string[]>;
}

type Source = LedgerEvent[] | LineageGraph;

function graphOf(src: Source): LineageGraph {
  return Array.isArray(src) ? lineageGraph(src) : src;
}

/** Find an artifact by id ("sha256:<hex>") or by campaign-relative path (latest registration there). */
export function resolveArtifact(src: Source, idOrPath: string): ArtifactEvent | undefined {
  const g = graphOf(src);
  if (isArtifactId(idOrPath)) return g.byId.get(idOrPath);
  const p = idOrPath.replace(/\\/g, '/').replace(/^\.\//, '');
  return g.byPath.get(p);
}

function taskInfo(g: LineageGraph, a: ArtifactEvent): TaskInfo | undefined {
  if (typeof a.task !== 'string') return undefined;
  const fromEvents = g.tasks.get(a.task);
  // The artifact event itself records the command, campaign hash and tool version that produced it.
  return {
    id: a.task,
    events: fromEvents?.events ?? 0,
    command: typeof a.command === 'string' ? a.command : fromEvents?.command,
    campaign_sha256: typeof a.campaign_sha256 === 'string' ? a.campaign_sha256 : fromEvents?.campaign_sha256,
    tool_version: typeof a.tool_version === 'string' ? a.tool_version : fromEvents?.tool_version,
    ...(fromEvents?.state !== undefined ? { state: fromEvents.state } : {}),
    ...(fromEvents?.programs !== undefined ? { programs: fromEvents.programs } : {}),
  };
}

function describeNode(g: LineageGraph, id: string, a: ArtifactEvent | undefined): LineageNode {
  if (!a) return { id, status: 'not_recorded', children: [] };
  const node: LineageNode = {
    id,
    status: 'recorded',
    role: a.role,
    path: a.path,
    ...(a.kind !== undefined ? { kind: a.kind } : {}),
    ...(a.bytes !== undefined ? { bytes: a.bytes } : {}),
    seq: a.seq,
    children: [],
  };
  const t = taskInfo(g, a);
  if (t) node.task = t;
  const regs = g.registrations.get(id) ?? [];
  const others = regs.filter((r) => r !== a);
  if (others.length) {
    node.also = others.map((r) => ({ path: r.path, ...(r.task ? { task: r.task } : {}), seq: r.seq }));
  }
  return node;
}

function upstreamEdges(g: LineageGraph, a: ArtifactEvent, opts: LineageOptions): Array<[string, Relation]> {
  const out: Array<[string, Relation]> = [];
  const seen = new Set<string>();
  for (const i of Array.isArray(a.inputs) ? a.inputs : []) {
    if (typeof i === 'string' && !seen.has(i)) {
      seen.add(i);
      out.push([i, 'input']);
    }
  }
  const fs = [...(Array.isArray(a.frame_sources) ? a.frame_sources : []), ...(opts.frameSources?.get(a.id) ?? [])];
  for (const i of fs) {
    if (typeof i === 'string' && !seen.has(i)) {
      seen.add(i);
      out.push([i, 'frame_source']);
    }
  }
  return out;
}

function downstreamEdges(g: LineageGraph, id: string): Array<[string, Relation]> {
  const out: Array<[string, Relation]> = [];
  const seen = new Set<string>();
  for (const c of g.consumers.get(id) ?? []) {
    if (!seen.has(c.id)) {
      seen.add(c.id);
      out.push([c.id, 'product']);
    }
  }
  for (const c of g.frameConsumers.get(id) ?? []) {
    if (!seen.has(c.id)) {
      seen.add(c.id);
      out.push([c.id, 'product']);
    }
  }
  return out;
}

function build(
  g: LineageGraph,
  rootId: string,
  root: ArtifactEvent | undefined,
  edges: (id: string, a: ArtifactEvent | undefined) => Array<[string, Relation]>,
  opts: LineageOptions,
): LineageNode {
  const expanded = new Set<string>();
  const onPath = new Set<string>();
  const maxDepth = opts.maxDepth ?? Infinity;
  // Iterative depth-first expansion (ledgers can be deep; avoid recursion limits).
  const rootNode = describeNode(g, rootId, root);
  type Frame = { node: LineageNode; next: Array<[string, Relation]>; i: number; depth: number };
  const stack: Frame[] = [];
  const enter = (node: LineageNode, a: ArtifactEvent | undefined, depth: number): void => {
    expanded.add(node.id);
    onPath.add(node.id);
    const next = node.status === 'recorded' ? edges(node.id, a) : [];
    if (depth >= maxDepth && next.length) {
      node.truncated = true;
      onPath.delete(node.id);
      return;
    }
    stack.push({ node, next, i: 0, depth });
  };
  enter(rootNode, root, 0);
  while (stack.length) {
    const top = stack[stack.length - 1];
    if (top.i >= top.next.length) {
      onPath.delete(top.node.id);
      stack.pop();
      continue;
    }
    const [cid, relation] = top.next[top.i++];
    const ca = g.byId.get(cid);
    const child = describeNode(g, cid, ca);
    child.relation = relation;
    top.node.children.push(child);
    if (onPath.has(cid)) {
      child.ref = 'cycle';
      continue;
    }
    if (expanded.has(cid)) {
      child.ref = 'repeat';
      continue;
    }
    enter(child, ca, top.depth + 1);
  }
  return rootNode;
}

/**
 * The upstream tree of an artifact (by id or campaign-relative path), or undefined when the ledger
 * does not know it. An id that is well-formed but unregistered gives undefined too.
 */
export function upstream(src: Source, idOrPath: string, opts: LineageOptions = {}): LineageNode | undefined {
  const g = graphOf(src);
  const a = resolveArtifact(g, idOrPath);
  if (!a) return undefined;
  return build(g, a.id, a, (_id, art) => (art ? upstreamEdges(g, art, opts) : []), opts);
}

/** The downstream tree: every artifact made (directly or not) from this one. */
export function downstream(src: Source, idOrPath: string, opts: LineageOptions = {}): LineageNode | undefined {
  const g = graphOf(src);
  const a = resolveArtifact(g, idOrPath);
  if (!a) return undefined;
  return build(g, a.id, a, (id) => downstreamEdges(g, id), opts);
}

/** Distinct artifacts with role 'start' (or no producing task and no inputs) reached upstream. */
export function roots(tree: LineageNode): LineageNode[] {
  const out = new Map<string, LineageNode>();
  const visit = (n: LineageNode): void => {
    if (n.status === 'recorded' && !n.ref && n.children.length === 0 && !n.truncated && (n.role === 'start' || !n.task)) {
      out.set(n.id, n);
    }
    n.children.forEach(visit);
  };
  visit(tree);
  return [...out.values()];
}

/** Where one frame came from: read by the caller from the frame's info keys. */
export interface FrameSource {
  source_artifact: string;
  source_frame: number;
}

export interface FrameStep {
  artifact: string;
  frame: number;
  path?: string;
  role?: string;
  task?: string;
  status: 'recorded' | 'not_recorded';
}

export interface FrameTrace {
  steps: FrameStep[];
  /** Why the trace stopped: the frame has no source keys (an origin), its artifact is unknown, a cycle, or the reader failed. */
  end: 'origin' | 'not_recorded' | 'cycle' | 'unreadable';
  message?: string;
}

/**
 * Follow one frame back through frame-selection files. `readSource(artifact, frame)` returns the
 * frame's source keys, or null when the frame carries none (it is an original). It is given the
 * artifact's registered event so it can open the file at its path.
 */
export async function frameUpstream(
  src: Source,
  idOrPath: string,
  frame: number,
  readSource: (artifact: ArtifactEvent, frame: number) => Promise<FrameSource | null>,
  maxHops = 1000,
): Promise<FrameTrace> {
  const g = graphOf(src);
  const steps: FrameStep[] = [];
  let a = resolveArtifact(g, idOrPath);
  let id = a?.id ?? idOrPath;
  let f = frame;
  const seen = new Set<string>();
  for (let hop = 0; hop < maxHops; hop++) {
    if (!a) {
      steps.push({ artifact: id, frame: f, status: 'not_recorded' });
      return { steps, end: 'not_recorded' };
    }
    steps.push({ artifact: a.id, frame: f, path: a.path, role: a.role, ...(a.task ? { task: a.task } : {}), status: 'recorded' });
    const key = `${a.id}#${f}`;
    if (seen.has(key)) return { steps, end: 'cycle' };
    seen.add(key);
    let s: FrameSource | null;
    try {
      s = await readSource(a, f);
    } catch (err) {
      return { steps, end: 'unreadable', message: (err as Error).message };
    }
    if (!s) return { steps, end: 'origin' };
    id = s.source_artifact;
    f = s.source_frame;
    a = g.byId.get(id);
  }
  return { steps, end: 'cycle', message: `stopped after ${maxHops} hops` };
}
