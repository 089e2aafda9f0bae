/**
 * Lineage as W3C PROV (PROV-JSON, W3C Member Submission 2013) and as a Graphviz graph.
 *
 * From a lineage tree (src/ledger/lineage.ts):
 *   entity       every artifact, id "sha256:<hex>" (its content hash; prefix sha256 = urn:sha256:),
 *                with its path, role, kind, bytes;
 *   activity     every producing task, id "ratchet:task/<task id>", with prov:startTime and prov:endTime
 *                from its last ended attempt, its command, the campaign file's hash and the tool version;
 *   wasGeneratedBy  artifact <- its task;   used  task -> each input artifact;
 *   wasDerivedFrom  artifact <- each input (with the task as prov:activity), or <- each frame source;
 *   agent        ratchet itself (prov:SoftwareAgent, with its version), associated with every task;
 *                a person (prov:Person, the login name) only when asked for.
 * The document names no host, no absolute path and no user unless asked.
 */
import type { LedgerEvent } from './journal.js';
import type { LineageNode } from './lineage.js';

export interface TaskTimes {
  start?: string;
  end?: string;
  state?: string;
}

/** Start and end of each task's last ended attempt (task_ended.start/end, else the event times). */
export function taskTimes(events: Iterable<LedgerEvent>): Map<string, TaskTimes> {
  const out = new Map<string, TaskTimes>();
  const submitted = new Map<string, string>();
  for (const e of events) {
    if (typeof e.task !== 'string') continue;
    if (e.type === 'task_submitted') submitted.set(e.task, e.at);
    if (e.type === 'task_ended') {
      const start = typeof e.start === 'string' ? e.start : submitted.get(e.task);
      const end = typeof e.end === 'string' ? e.end : e.at;
      out.set(e.task, { ...(start ? { start } : {}), end, ...(typeof e.state === 'string' ? { state: e.state } : {}) });
    }
  }
  return out;
}

export interface ProvOptions {
  toolVersion: string;
  /** A person to name as an agent (login name); omitted unless given. */
  user?: string;
}

type Attrs = Record<string, string | number | boolean | { $: string; type: string }>;

export interface ProvDocument {
  prefix: Record<string, string>;
  entity: Record<string, Attrs>;
  activity: Record<string, Attrs>;
  agent: Record<string, Attrs>;
  wasGeneratedBy: Record<string, Attrs>;
  used: Record<string, Attrs>;
  wasDerivedFrom: Record<string, Attrs>;
  wasAssociatedWith: Record<string, Attrs>;
  wasAttributedTo?: Record<string, Attrs>;
}

export const activityId = (task: string): string => `ratchet:task/${task}`;

/** Distinct nodes (one per artifact id, the fully described one) and edges child -> parent of a lineage tree. */
export function flattenTree(root: LineageNode | LineageNode[]): { nodes: Map<string, LineageNode>; edges: { parent: string; child: string; relation: string }[] } {
  const nodes = new Map<string, LineageNode>();
  const edges: { parent: string; child: string; relation: string }[] = [];
  const seen = new Set<string>();
  const stack: LineageNode[] = Array.isArray(root) ? [...root] : [root];
  while (stack.length) {
    const n = stack.pop()!;
    const have = nodes.get(n.id);
    if (!have || (have.ref && !n.ref)) nodes.set(n.id, n);
    for (const c of n.children) {
      const key = `${n.id}|${c.id}`;
      if (!seen.has(key)) {
        seen.add(key);
        edges.push({ parent: n.id, child: c.id, relation: c.relation ?? 'input' });
      }
      stack.push(c);
    }
  }
  return { nodes, edges };
}

/**
 * A PROV-JSON document of a lineage tree (or of several, merged: e.g. a committee's models). Upstream trees: a child is an input of its parent;
 * downstream trees (relation 'product'): a child was made from its parent.
 */
export function provDocument(root: LineageNode | LineageNode[], times: Map<string, TaskTimes>, opts: ProvOptions): ProvDocument {
  const { nodes, edges } = flattenTree(root);
  const software = `ratchet:software/ratchet-${opts.toolVersion}`;
  const doc: ProvDocument = {
    prefix: { ratchet: 'urn:ratchet:', sha256: 'urn:sha256:' },
    entity: {},
    activity: {},
    agent: { [software]: { 'prov:type': { $: 'prov:SoftwareAgent', type: 'prov:QUALIFIED_NAME' }, 'prov:label': `ratchet ${opts.toolVersion}`, 'ratchet:version': opts.toolVersion } },
    wasGeneratedBy: {},
    used: {},
    wasDerivedFrom: {},
    wasAssociatedWith: {},
  };
  const person = opts.user ? `ratchet:person/${opts.user}` : undefined;
  if (person) {
    doc.agent[person] = { 'prov:type': { $: 'prov:Person', type: 'prov:QUALIFIED_NAME' }, 'prov:label': opts.user! };
    doc.wasAttributedTo = {};
  }
  let k = 0;
  const rel = (prefix: string) => `_:${prefix}${++k}`;
  for (const n of nodes.values()) {
    const e: Attrs = { 'ratchet:sha256': n.id.replace(/^sha256:/, '') };
    if (n.status === 'not_recorded') e['ratchet:status'] = 'not recorded in the ledger';
    if (n.path !== undefined) {
      e['prov:label'] = n.path;
      e['ratchet:path'] = n.path;
    }
    if (n.role !== undefined) e['ratchet:role'] = n.role;
    if (n.kind !== undefined) e['ratchet:kind'] = n.kind;
    if (n.bytes !== undefined) e['ratchet:bytes'] = n.bytes;
    doc.entity[n.id] = e;
    const t = n.task;
    if (!t) continue;
    const act = activityId(t.id);
    if (!doc.activity[act]) {
      const tt = times.get(t.id);
      const a: Attrs = { 'prov:label': t.id };
      if (tt?.start) a['prov:startTime'] = tt.start;
      if (tt?.end) a['prov:endTime'] = tt.end;
      if (t.command) a['ratchet:command'] = t.command;
      if (t.campaign_sha256) a['ratchet:campaign_sha256'] = t.campaign_sha256;
      if (t.tool_version) a['ratchet:tool_version'] = t.tool_version;
      if (tt?.state) a['ratchet:state'] = tt.state;
      doc.activity[act] = a;
      doc.wasAssociatedWith[rel('assoc')] = { 'prov:activity': act, 'prov:agent': software };
      if (person) doc.wasAssociatedWith[rel('assoc')] = { 'prov:activity': act, 'prov:agent': person };
    }
    doc.wasGeneratedBy[rel('gen')] = { 'prov:entity': n.id, 'prov:activity': act, ...(times.get(t.id)?.end ? { 'prov:time': times.get(t.id)!.end! } : {}) };
    if (person && doc.wasAttributedTo) doc.wasAttributedTo[rel('attr')] = { 'prov:entity': n.id, 'prov:agent': person };
  }
  const usedSeen = new Set<string>();
  for (const ed of edges) {
    // made = the artifact produced, from = what it was made from.
    const [made, from] = ed.relation === 'product' ? [ed.child, ed.parent] : [ed.parent, ed.child];
    const madeNode = nodes.get(made);
    const task = madeNode?.task?.id;
    const d: Attrs = { 'prov:generatedEntity': made, 'prov:usedEntity': from };
    if (ed.relation === 'frame_source') d['prov:type'] = 'ratchet:frame_source';
    else if (task) d['prov:activity'] = activityId(task);
    doc.wasDerivedFrom[rel('der')] = d;
    if (task && ed.relation !== 'frame_source' && !usedSeen.has(`${task}|${from}`)) {
      usedSeen.add(`${task}|${from}`);
      doc.used[rel('use')] = { 'prov:activity': activityId(task), 'prov:entity': from };
    }
  }
  return doc;
}

function q(s: string): string {
  return `"${s.replace(/\\/g, '\\\\').replace(/"/g, '\\"').replace(/\n/g, '\\n')}"`;
}

/**
 * The same graph for Graphviz (`dot -Tsvg`): artifacts as ellipses (role, path, short hash), tasks as
 * boxes; arrows point from what was made to what made it, as PROV draws them.
 */
export function provDot(doc: ProvDocument, title = 'lineage'): string {
  const L: string[] = [`digraph ${q(title)} {`, '  rankdir=RL;', '  node [fontname="Helvetica", fontsize=10];'];
  for (const [id, e] of Object.entries(doc.entity)) {
    const label = `${e['ratchet:role'] ?? '?'}\n${e['ratchet:path'] ?? ''}\n${id.slice(7, 19)}`;
    L.push(`  ${q(id)} [shape=ellipse, style=filled, fillcolor="#fffbe6", label=${q(label)}${e['ratchet:status'] ? ', style="filled,dashed"' : ''}];`);
  }
  for (const [id, a] of Object.entries(doc.activity)) {
    L.push(`  ${q(id)} [shape=box, style=filled, fillcolor="#e6f0ff", label=${q(`task ${a['prov:label']}`)}];`);
  }
  for (const g of Object.values(doc.wasGeneratedBy)) L.push(`  ${q(String(g['prov:entity']))} -> ${q(String(g['prov:activity']))} [label="wasGeneratedBy", fontsize=8];`);
  for (const u of Object.values(doc.used)) L.push(`  ${q(String(u['prov:activity']))} -> ${q(String(u['prov:entity']))} [label="used", fontsize=8];`);
  for (const d of Object.values(doc.wasDerivedFrom)) {
    if (d['prov:type'] === 'ratchet:frame_source') L.push(`  ${q(String(d['prov:generatedEntity']))} -> ${q(String(d['prov:usedEntity']))} [label="frames from", style=dashed, fontsize=8];`);
  }
  L.push('}');
  return L.join('\n') + '\n';
}

/** PROV-JSON of a lineage tree of a campaign (task times read from its ledger). */
export async function campaignProv(campaignDir: string, tree: LineageNode | LineageNode[], opts: ProvOptions): Promise<ProvDocument> {
  const { readLedger } = await import('./journal.js');
  const { events } = await readLedger(campaignDir);
  return provDocument(tree, taskTimes(events), opts);
}
