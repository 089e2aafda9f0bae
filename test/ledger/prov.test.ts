/**
 * `ratchet lineage TARGET --format prov-json|dot` on a finished two-round campaign (engine fixture).
 *
 * The PROV-JSON is validated against the PROV-JSON JSON Schema (draft-04) kept in
 * test/fixtures/prov-json.schema.json: the schema of the W3C Member Submission "PROV-JSON" (2013),
 * as published by the openprovenance.org project at https://openprovenance.org/prov-json/schema,
 * copied as data. Validation by `ajv` with its draft-04 build (ajv-draft-04), an independent validator.
 * Its graph must be the one `lineage --json` prints; the DOT text must render with Graphviz's `dot`.
 */
import { existsSync, readFileSync } from 'node:fs';
import { spawnSync } from 'node:child_process';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import Ajv from 'ajv-draft-04';
import { REPO, cliArgs, ledgerEvents, removeCampaigns, twoRoundCampaign } from '../engine/fixture.js';

afterAll(removeCampaigns);

const DOT = ['/usr/bin/dot', '/usr/local/bin/dot'].find((p) => existsSync(p));
const schema = JSON.parse(readFileSync(join(REPO, 'test/fixtures/prov-json.schema.json'), 'utf8'));
const validate = new Ajv.default({ strict: false, allErrors: true }).compile(schema); // CommonJS module: its class is .default

let dir = '';
let file = '';
beforeAll(async () => {
  ({ dir, file } = await twoRoundCampaign());
}, 240_000);

function lineage(...args: string[]) {
  const r = spawnSync(process.execPath, [...cliArgs(), 'lineage', ...args], { cwd: REPO, encoding: 'utf8', timeout: 120_000 });
  expect(r.stderr).toBe('');
  expect(r.status).toBe(0);
  return r.stdout;
}

type Node = { id: string; children: Node[]; relation?: string; task?: { id: string } };

function treeEdges(t: Node): { nodes: Set<string>; edges: Set<string>; tasks: Set<string> } {
  const nodes = new Set<string>();
  const edges = new Set<string>();
  const tasks = new Set<string>();
  const walk = (n: Node) => {
    nodes.add(n.id);
    if (n.task) tasks.add(n.task.id);
    for (const c of n.children) {
      edges.add(`${n.id}<-${c.id}`);
      walk(c);
    }
  };
  walk(t);
  return { nodes, edges, tasks };
}

describe('lineage as W3C PROV-JSON and Graphviz DOT', () => {
  it('the schema itself rejects a document that breaks it (the check can fail)', () => {
    expect(validate({ wasGeneratedBy: { _g: { 'prov:activity': 'a' } } })).toBe(false); // prov:entity is required
    expect(validate({ entity: { e: { x: { $: 1 } } } })).toBe(false); // a typed literal needs a type
  });

  it('the latest model\'s upstream validates against the PROV-JSON schema and is the graph lineage --json prints', () => {
    const model = ledgerEvents(dir).filter((e) => e.type === 'artifact' && e.role === 'model').at(-1)!;
    const target = join(dir, model.path);
    const doc = JSON.parse(lineage(target, '--format', 'prov-json'));
    const ok = validate(doc);
    expect(validate.errors ?? []).toEqual([]);
    expect(ok).toBe(true);
    const tree = JSON.parse(lineage(target, '--json')).tree as Node;
    const { nodes, edges, tasks } = treeEdges(tree);
    expect(new Set(Object.keys(doc.entity))).toEqual(nodes);
    const derived = new Set(Object.values<any>(doc.wasDerivedFrom).map((d) => `${d['prov:generatedEntity']}<-${d['prov:usedEntity']}`));
    expect(derived).toEqual(edges);
    expect(new Set(Object.values<any>(doc.activity).map((a) => a['prov:label']))).toEqual(tasks);
    // Every entity carries its content hash; every activity its start and end; ratchet is the agent.
    for (const [id, e] of Object.entries<any>(doc.entity)) expect(`sha256:${e['ratchet:sha256']}`).toBe(id);
    const ended = new Map(ledgerEvents(dir).filter((e) => e.type === 'task_ended').map((e) => [e.task, e]));
    for (const a of Object.values<any>(doc.activity)) {
      expect(a['prov:startTime']).toBe(ended.get(a['prov:label'])!.start);
      expect(a['prov:endTime']).toBe(ended.get(a['prov:label'])!.end);
    }
    const agents = Object.values<any>(doc.agent);
    expect(agents).toHaveLength(1);
    expect(agents[0]['prov:type'].$).toBe('prov:SoftwareAgent');
    // No person unless asked.
    expect(JSON.stringify(doc)).not.toContain('prov:Person');
    const withUser = JSON.parse(lineage(target, '--format', 'prov-json', '--with-user'));
    expect(validate(withUser)).toBe(true);
    expect(Object.values<any>(withUser.agent).some((a) => a['prov:type'].$ === 'prov:Person')).toBe(true);
  });

  it('downstream of the start structures validates too', () => {
    const start = ledgerEvents(dir).find((e) => e.type === 'artifact' && e.role === 'start')!;
    const doc = JSON.parse(lineage(join(dir, start.path), '--down', '--format', 'prov-json'));
    expect(validate(doc)).toBe(true);
    const tree = JSON.parse(lineage(join(dir, start.path), '--down', '--json')).tree as Node;
    expect(new Set(Object.keys(doc.entity))).toEqual(treeEdges(tree).nodes);
  });

  it.skipIf(!DOT)('the DOT output renders with Graphviz dot -Tsvg, one node per entity and activity', () => {
    const model = ledgerEvents(dir).filter((e) => e.type === 'artifact' && e.role === 'model').at(-1)!;
    const text = lineage(join(dir, model.path), '--format', 'dot');
    const doc = JSON.parse(lineage(join(dir, model.path), '--format', 'prov-json'));
    const r = spawnSync(DOT!, ['-Tsvg'], { input: text, encoding: 'utf8' });
    expect(r.stderr).toBe('');
    expect(r.status).toBe(0);
    expect(r.stdout).toContain('<svg');
    const drawn = (r.stdout.match(/class="node"/g) ?? []).length;
    expect(drawn).toBe(Object.keys(doc.entity).length + Object.keys(doc.activity).length);
  });

  it.runIf(!DOT)('DOT rendering skipped: Graphviz dot not found (install Debian\'s graphviz)', () => {
    expect(DOT).toBeUndefined();
  });

  it('refuses an unknown format, naming the option', () => {
    const r = spawnSync(process.execPath, [...cliArgs(), 'lineage', join(dir, 'start.xyz'), '--format', 'rdf'], { cwd: REPO, encoding: 'utf8' });
    expect(r.status).not.toBe(0);
    expect(r.stderr).toContain('--format expects text, json, prov-json or dot, found "rdf"');
  });
});
