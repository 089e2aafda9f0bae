/**
 * docs/contract.md against the engine: a small campaign (the engine tests' invented one, fake stage
 * programs, test/engine/fixture.ts) runs on the local backend, and every task.json it planned is read
 * back. Every input, parameter and output name a task carries must be listed in the page's table for
 * its stage, and every row the page marks "always" must be in every task of that stage, so the page
 * cannot drift from the code in either direction.
 */
import { readFileSync, readdirSync, existsSync } from 'node:fs';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { BufferOutput } from '../../src/engine/output.js';
import { runCampaign } from '../../src/engine/run.js';
import { makeCampaign, removeCampaigns } from '../engine/fixture.js';

const PAGE = fileURLToPath(new URL('../../docs/contract.md', import.meta.url));

type Kind = 'input' | 'param' | 'output';
interface Row { kind: Kind; name: string; always: boolean }

/** The page's tables, by section heading ("sample", "label", "validate (errors)" ...). */
function pageTables(): Map<string, Row[]> {
  const out = new Map<string, Row[]>();
  let section = '';
  for (const line of readFileSync(PAGE, 'utf8').split('\n')) {
    const h = /^### (.+)$/.exec(line);
    if (h) section = h[1].trim();
    const m = /^\| (input|param|output) \| `([^`]+)` \|[^|]*\| ([^|]+) \|/.exec(line);
    if (m && section) {
      if (!out.has(section)) out.set(section, []);
      out.get(section)!.push({ kind: m[1] as Kind, name: m[2], always: m[3].trim() === 'always' });
    }
  }
  return out;
}

/** A task's section in the page. */
function sectionOf(json: { stage: string; params: Record<string, unknown> }): string {
  return json.stage === 'validate' ? `validate (${json.params.kind})` : json.stage;
}

/** model_3 -> model_<m>, source_1 -> source_<k>. */
const generic = (name: string) => name.replace(/^model_\d+$/, 'model_<m>').replace(/^source_\d+$/, 'source_<k>');

describe('docs/contract.md', () => {
  const { dir, file } = makeCampaign({ maxRounds: 2 });
  const tasks: { path: string; json: any }[] = [];
  beforeAll(async () => {
    const out = new BufferOutput();
    await runCampaign({ campaign: file, out, error: (m) => out.line(`error: ${m}`) });
    const rounds = join(dir, 'rounds');
    for (const r of readdirSync(rounds))
      for (const s of readdirSync(join(rounds, r)))
        for (const t of readdirSync(join(rounds, r, s))) {
          const p = join(rounds, r, s, t, 'task.json');
          if (existsSync(p)) tasks.push({ path: p, json: JSON.parse(readFileSync(p, 'utf8')) });
        }
  }, 300_000);
  afterAll(() => removeCampaigns());

  it('lists every input, parameter and output name of every planned task', () => {
    const tables = pageTables();
    const sections = new Set(tasks.map((t) => sectionOf(t.json)));
    // Every stage ran (and both kinds of validate task).
    expect([...sections].sort()).toEqual(['label', 'sample', 'simulate', 'train', 'validate (errors)', 'validate (nve)']);
    const missing: string[] = [];
    for (const { path, json } of tasks) {
      const rows = tables.get(sectionOf(json)) ?? [];
      const has = (kind: Kind, name: string) => rows.some((r) => r.kind === kind && r.name === generic(name));
      for (const n of Object.keys(json.inputs)) if (!has('input', n)) missing.push(`${path}: input ${n}`);
      for (const n of Object.keys(json.params)) if (!has('param', n)) missing.push(`${path}: param ${n}`);
      for (const n of Object.keys(json.outputs)) if (!has('output', n)) missing.push(`${path}: output ${n}`);
    }
    expect(missing, 'names a task carries that docs/contract.md does not list').toEqual([]);
  });

  it('has every row marked "always" in every task of its stage', () => {
    const extra: string[] = [];
    for (const [section, rows] of pageTables()) {
      const own = tasks.filter((t) => sectionOf(t.json) === section);
      expect(own.length, `no task of section "${section}" ran`).toBeGreaterThan(0);
      for (const r of rows.filter((x) => x.always)) {
        for (const { path, json } of own) {
          const names = Object.keys(r.kind === 'input' ? json.inputs : r.kind === 'param' ? json.params : json.outputs).map(generic);
          if (!names.includes(r.name)) extra.push(`${section}: ${r.kind} ${r.name} is not in ${path}`);
        }
      }
    }
    expect(extra, 'rows of docs/contract.md marked "always" that a task lacks').toEqual([]);
  });
});
