/**
 * Docs that cannot drift: every name the program exposes to a user is listed in the docs, and every name
 * the docs list exists in the program. Each list is derived from the code itself (a rendered batch
 * script, the `type:` of every ledger event the engine writes, the status cell's words, the task and
 * stage phases, the campaign's JSON Schema), never from a hand-kept list, so a new name shows up here
 * as a failure that says which name is missing from which page.
 */
import { readFileSync, readdirSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { baseEnv, renderScript } from '../../src/backends/render.js';
import type { TaskSpec } from '../../src/backends/backend.js';
import { taskSpec, type TaskJson } from '../../src/engine/plan.js';
import { campaignJsonSchema } from '../../src/campaign/jsonschema.js';

const ROOT = fileURLToPath(new URL('../../', import.meta.url));
const read = (rel: string) => readFileSync(join(ROOT, rel), 'utf8');

/** Rows of the markdown table that follows the line matching `heading` (first column, backticks stripped). */
function tableAfter(page: string, heading: RegExp): string[][] {
  const lines = read(page).split('\n');
  const at = lines.findIndex((l) => heading.test(l));
  if (at < 0) throw new Error(`${page}: no line matching ${heading}: the table this test reads is gone or renamed`);
  const rows: string[][] = [];
  let i = at + 1;
  while (i < lines.length && !lines[i]!.startsWith('|')) i++;
  for (i += 2; i < lines.length && lines[i]!.startsWith('|'); i++) {
    rows.push(lines[i]!.split('|').slice(1, -1).map((c) => c.trim()));
  }
  return rows;
}
const ticked = (cell: string) => [...cell.matchAll(/`([^`]+)`/g)].map((m) => m[1]!);

/** "names in code but not in the page" and the reverse, as readable lines (empty when they agree). */
function disagreement(what: string, code: Iterable<string>, page: string, where: string, documented: Iterable<string>, addHint: (n: string) => string): string[] {
  const c = new Set(code);
  const d = new Set(documented);
  const out: string[] = [];
  for (const n of [...c].sort()) if (!d.has(n)) out.push(`${page}: ${what} ${n} is missing from ${where}; add ${addHint(n)}`);
  for (const n of [...d].sort()) if (!c.has(n)) out.push(`${page}: ${where} lists ${what} ${n}, which the program no longer has; remove it`);
  return out;
}

// ---------------------------------------------------------------------------------------------
// Environment variables: what run.sh exports

/** The names a rendered run.sh exports, with per-input/output/parameter names as <NAME>. */
function exportedVariables(): Set<string> {
  const view = {
    name: 'c',
    dir: '/camp',
    stages: { label: { command: 'true', setup: [], resources: { cpus: 1, gpus: 0, walltime_s: 60 } } },
  } as never;
  const json = {
    round: 0,
    stage: 'label',
    task: 'r0/label/0000',
    seed: 1,
    inputs: { someinput: '/camp/a.xyz' },
    params: { someparam: 1 },
    outputs: { someoutput: 'b.xyz' },
    input_artifacts: [],
    output_roles: {},
  } as unknown as TaskJson;
  const spec: TaskSpec = taskSpec(view, json, '/camp/rounds/r0/label/0000');
  const script = renderScript(spec, []);
  const names = new Set<string>();
  for (const m of script.matchAll(/^export ([A-Za-z_][A-Za-z0-9_]*)=/gm)) {
    names.add(m[1]!.replace(/_(SOMEINPUT|SOMEOUTPUT|SOMEPARAM)$/, '_<NAME>'));
  }
  // The templates may export more of their own (a site's variables are not ratchet's).
  for (const f of readdirSync(join(ROOT, 'templates'))) {
    for (const m of read(`templates/${f}`).matchAll(/^\s*export (RATCHET_[A-Z0-9_]+)=/gm)) names.add(m[1]!);
  }
  return names;
}

describe('environment variables of a task', () => {
  const code = exportedVariables();

  it('reads a non-trivial list from the code', () => {
    // baseEnv is the script's own part; the rest come from the engine (taskSpec).
    for (const n of Object.keys(baseEnv({ id: 't', dir: '/x', round: 0, stage: 'label', resources: { cpus: 1 } } as never))) expect(code).toContain(n);
    expect(code).toContain('RATCHET_IN_<NAME>');
  });

  it('docs/tasks.md: the environment table lists exactly what run.sh exports', () => {
    const rows = tableAfter('docs/tasks.md', /^Environment a command sees/).map((r) => ticked(r[0]!)[0]!);
    expect(disagreement('variable', code, 'docs/tasks.md', 'the table under "Environment a command sees"', rows, (n) => `a row "| \`${n}\` | ... |"`)).toEqual([]);
  });

  for (const [page, anchor] of [
    ['docs/tour.md', /RATCHET_TASK_DIR/],
    ['docs/running.md', /^\*\*What each stage's command gets/],
  ] as const) {
    it(`${page}: the paragraph listing the variables names each one`, () => {
      const text = read(page);
      const paras = text.split(/\n\s*\n/);
      const para = paras.find((p) => anchor.test(p) && /RATCHET_TASK\b/.test(p));
      expect(para, `${page}: no paragraph listing the RATCHET_* variables`).toBeDefined();
      const listed = new Set([...para!.matchAll(/`(RATCHET_[A-Z0-9_]+(?:<NAME>)?)`/g)].map((m) => m[1]!));
      expect(disagreement('variable', code, page, 'the paragraph listing the task environment', listed, (n) => `\`${n}\` to it`)).toEqual([]);
    });
  }
});

// ---------------------------------------------------------------------------------------------
// Ledger event types

function sourceFiles(dir: string): string[] {
  const out: string[] = [];
  for (const e of readdirSync(join(ROOT, dir))) {
    const rel = `${dir}/${e}`;
    if (statSync(join(ROOT, rel)).isDirectory()) out.push(...sourceFiles(rel));
    else if (e.endsWith('.ts')) out.push(rel);
  }
  return out;
}

/** Every `type: '...'` the engine and the ledger code write (comments left out), with one file that does. */
function eventTypes(): Map<string, string> {
  const found = new Map<string, string>();
  for (const f of [...sourceFiles('src/engine'), ...sourceFiles('src/ledger')]) {
    for (const line of read(f).split('\n')) {
      if (/^\s*(\*|\/\/|\/\*)/.test(line)) continue;
      for (const m of line.matchAll(/\btype: '([a-z][a-z_]*)'/g)) if (!found.has(m[1]!)) found.set(m[1]!, f);
    }
  }
  return found;
}

describe('ledger event types', () => {
  const code = eventTypes();

  it('finds the events of src/engine/events.ts among them', () => {
    for (const m of read('src/engine/events.ts').matchAll(/^\s+type: '([a-z_]+)';/gm)) expect([...code.keys()]).toContain(m[1]);
    expect(code.size).toBeGreaterThanOrEqual(18);
  });

  it('docs/ledger.md: the event table lists every type the program writes, and no other', () => {
    const rows = tableAfter('docs/ledger.md', /^### Event types/).map((r) => ticked(r[0]!)[0]!);
    expect(
      disagreement('event type', code.keys(), 'docs/ledger.md', 'the table under "### Event types"', rows, (n) => `a row "| \`${n}\` | <when it is written> | <its fields> |" (written in ${code.get(n)})`),
    ).toEqual([]);
  });
});

// ---------------------------------------------------------------------------------------------
// Status words, task and stage phases

/** A string-literal union `export type NAME = 'a' | 'b' | ...` in a source file (other members followed by name). */
function union(file: string, name: string): string[] {
  const m = new RegExp(`export type ${name} =([^;]+);`).exec(read(file));
  if (!m) throw new Error(`${file}: no type ${name}`);
  return [...m[1]!.replace(/\/\/[^\n]*/g, '').matchAll(/'([^']+)'/g)].map((x) => x[1]!);
}

/** The words the status table's cells can show, read from cellText in src/engine/status.ts. */
function cellWords(): string[] {
  const src = read('src/engine/status.ts');
  const start = src.indexOf('function cellText(');
  if (start < 0) throw new Error('src/engine/status.ts: cellText is gone: update this test to read the cell words from their new place');
  const body = src.slice(start, src.indexOf('\n}\n', start));
  const words = new Set<string>();
  for (const m of body.matchAll(/pad\('([^']+)'/g)) words.add(m[1]!);
  for (const m of body.matchAll(/w = ([^;]+);/g)) for (const q of m[1]!.matchAll(/'([^']+)'/g)) words.add(q[1]!);
  // `w = s.verdict` shows a gate's verdict; '?' stands for a verdict not recorded.
  if (/s\.verdict/.test(body)) for (const v of union('src/gates/types.ts', 'Verdict')) words.add(v);
  return [...words];
}

describe('status words', () => {
  it('docs/running.md: the status cell table lists every word a cell can show', () => {
    const code = cellWords();
    expect(code).toEqual(expect.arrayContaining(['ready', 'running', 'judging', '·', 'pass']));
    const rows = tableAfter('docs/running.md', /^#### Status cells/).map((r) => ticked(r[0]!)[0]!);
    expect(disagreement('cell word', code, 'docs/running.md', 'the table under "#### Status cells"', rows, (n) => `a row "| \`${n}\` | <what it means> |"`)).toEqual([]);
  });

  it('docs/running.md: the task state table lists every state of a task', () => {
    const states = [...union('src/engine/state.ts', 'TaskPhase'), ...union('src/backends/backend.ts', 'TaskState')];
    const rows = tableAfter('docs/running.md', /^#### Task states/).map((r) => ticked(r[0]!)[0]!);
    expect(disagreement('task state', states, 'docs/running.md', 'the table under "#### Task states"', rows, (n) => `a row "| \`${n}\` | <what it means> |"`)).toEqual([]);
  });

  it('docs/running.md: the stage phase table lists every phase of a stage', () => {
    const phases = union('src/engine/state.ts', 'StagePhase');
    const rows = tableAfter('docs/running.md', /^#### Stage phases/).map((r) => ticked(r[0]!)[0]!);
    expect(disagreement('stage phase', phases, 'docs/running.md', 'the table under "#### Stage phases"', rows, (n) => `a row "| \`${n}\` | <what it means> |"`)).toEqual([]);
  });
});

// ---------------------------------------------------------------------------------------------
// Campaign keys and their defaults

interface Key { path: string; default?: unknown }

/** Every key of the campaign's JSON Schema, with its default; the {warn, fail} form of a limit is left out. */
function schemaKeys(): Key[] {
  const out: Key[] = [];
  const visit = (node: any, path: string) => {
    for (const [k, child] of Object.entries((node?.properties ?? {}) as Record<string, any>)) {
      const p = path ? `${path}.${k}` : k;
      // A section (a key holding keys) is documented through its keys.
      if (!child.properties) out.push({ path: p, default: child.default });
      visit(child, p);
      if (child.items) visit(child.items, `${p}[]`);
    }
  };
  visit(campaignJsonSchema(), '');
  return out.filter((k) => !/\.(warn|fail)$/.test(k.path));
}

/** Every table row of docs/campaign.md naming keys: the keys (backticked, with `a` / `b` and `a`, `b` forms) and the default cell. */
function campaignRows(): { keys: string[]; default: string }[] {
  const rows: { keys: string[]; default: string }[] = [];
  let header: string[] = [];
  for (const line of read('docs/campaign.md').split('\n')) {
    if (!line.startsWith('|')) {
      header = [];
      continue;
    }
    const cells = line.split('|').slice(1, -1).map((c) => c.trim());
    if (header.length === 0) {
      header = cells;
      continue;
    }
    const ki = header.indexOf('key');
    const di = header.indexOf('default');
    if (ki < 0 || di < 0 || /^-+$/.test(cells[0]!)) continue;
    rows.push({ keys: ticked(cells[ki]!), default: cells[di]! });
  }
  return rows;
}

/** The path's trailing components as the docs write them: "stages.label.resources.cpus" -> "cpus", "resources.cpus", ... */
function suffixes(path: string): string[] {
  const parts = path.replace(/\[\]/g, '').split('.');
  return parts.map((_, i) => parts.slice(i).join('.'));
}

/** A default as the docs write it. */
function shown(v: unknown): string {
  return typeof v === 'string' ? v : JSON.stringify(v);
}

describe('campaign keys', () => {
  const keys = schemaKeys();
  const rows = campaignRows();
  const documentedKeys = rows.flatMap((r) => r.keys);

  it('docs/campaign.md names every key of the campaign', () => {
    const missing = keys
      .filter((k) => !suffixes(k.path).some((s) => documentedKeys.includes(s)))
      .map((k) => `docs/campaign.md: campaign key ${k.path}${k.default !== undefined ? ` (default ${shown(k.default)})` : ''} is missing from the key tables; add a row for \`${k.path.split('.').pop()}\``);
    expect(missing).toEqual([]);
  });

  it('docs/campaign.md names no key the campaign does not have', () => {
    const known = new Set(keys.flatMap((k) => suffixes(k.path)));
    // Sections are keys too (`backend`, `budget`), and their dotted forms (`resources.partition`).
    for (const k of keys) for (const s of suffixes(k.path)) for (let i = 1; i < s.split('.').length; i++) known.add(s.split('.').slice(0, i).join('.'));
    const stale = [...new Set(documentedKeys)].filter((d) => !known.has(d)).map((d) => `docs/campaign.md: a key table lists \`${d}\`, which is not a campaign key; remove or rename the row`);
    expect(stale).toEqual([]);
  });

  it('docs/campaign.md shows each single-valued default as the schema has it', () => {
    const wrong: string[] = [];
    let compared = 0;
    for (const k of keys) {
      if (k.default === undefined) continue;
      if (typeof k.default === 'object' && k.default !== null && !Array.isArray(k.default) && Object.keys(k.default as object).length === 0 && !k.path.endsWith('params') && !k.path.endsWith('min_distance')) continue; // a section: its keys carry the defaults
      // The row naming this key alone, by its longest written suffix.
      const candidates = suffixes(k.path)
        .map((s) => rows.filter((r) => r.keys.length === 1 && r.keys[0] === s && !/[/,]/.test(r.default)))
        .find((r) => r.length > 0);
      if (!candidates) continue;
      const want = shown(k.default);
      compared++;
      const ok = candidates.some((r) => {
        const cell = r.default.replace(/`/g, '').replace(/^"(.*)"$/, '$1').trim();
        return cell === want || (typeof k.default === 'number' && Number(cell) === k.default);
      });
      if (!ok) wrong.push(`docs/campaign.md: campaign key ${k.path}: the schema's default is ${want}, the docs show ${candidates.map((r) => JSON.stringify(r.default)).join(' / ')}`);
    }
    expect(wrong).toEqual([]);
    expect(compared).toBeGreaterThan(30); // the rows were found: this check is not empty
  });
});

// ---------------------------------------------------------------------------------------------
// The library entry point

describe("docs/library.md: what `import from 'ratchet'` gives", () => {
  it('every name in the table is exported by src/index.ts', async () => {
    const lib = (await import('../../src/index.js')) as Record<string, unknown>;
    const rows = tableAfter('docs/library.md', /^## Using ratchet as a library/);
    const names = rows.flatMap((r) => ticked(r[0]!)).filter((n) => /^[A-Za-z_]\w*$/.test(n) && n !== 'Frame'); // Frame is a type
    expect(names.length).toBeGreaterThan(30);
    expect(names.filter((n) => !(n in lib)).map((n) => `docs/library.md: ${n} is listed under "Using ratchet as a library" but src/index.ts does not export it`)).toEqual([]);
  });
});
