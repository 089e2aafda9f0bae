/**
 * The starter campaign (`ratchet init`) says: "Values shown are the defaults unless marked "edit"". This
 * holds it to that, line by line, against the campaign's JSON Schema (src/campaign/jsonschema.ts, made
 * from the zod schema, the single source of the defaults):
 * - a setting line without "edit" shows the schema's default (for a gate limit, the default fail limit
 *   or the default {warn, fail}; for a condition's seed, its position in the list);
 * - a commented-out setting whose value is not the default says so: "edit", or states the real default
 *   ("default: ...", "absent: ...", "checked only when given");
 * - every setting line names a key of the campaign.
 */
import { describe, expect, it } from 'vitest';
import { isMap, isPair, isScalar, isSeq, LineCounter, parse, parseDocument, type Node } from 'yaml';
import { isDeepStrictEqual } from 'node:util';
import { campaignJsonSchema } from '../../src/campaign/jsonschema.js';
import { STARTER_CAMPAIGN } from '../../src/campaign/starter.js';

type Path = (string | number)[];
const show = (p: Path) => p.reduce<string>((s, k) => (typeof k === 'number' ? `${s}[${k}]` : s ? `${s}.${k}` : k), '');

function schemaAt(path: Path): any {
  let node: any = campaignJsonSchema();
  for (const k of path) {
    node = typeof k === 'number' ? node?.items : node?.properties?.[k];
    if (!node) return undefined;
  }
  return node;
}

/** Why `value` at `path` is not the default, or undefined when it is. */
function notDefault(path: Path, value: unknown): string | undefined {
  const node = schemaAt(path);
  if (!node && typeof path[path.length - 1] === 'number' && schemaAt(path.slice(0, -1))) return 'a list item has no default';
  if (!node) return `${show(path)} is not a campaign key`;
  if (value === null && node.properties) return undefined; // a section left empty: its defaults apply
  if ('default' in node) return isDeepStrictEqual(value, node.default) ? undefined : `the default is ${JSON.stringify(node.default)}`;
  const desc: string = node.description ?? '';
  const limit = /Default: warn ([\d.]+), fail ([\d.]+)/.exec(desc);
  if (limit) {
    const [warn, fail] = [Number(limit[1]), Number(limit[2])];
    return value === fail || isDeepStrictEqual(value, { warn, fail }) ? undefined : `the default is {warn: ${warn}, fail: ${fail}}`;
  }
  const last = path[path.length - 2];
  if (/position in the list/.test(desc) && typeof last === 'number') return value === last ? undefined : `the default is the position, ${last}`;
  return 'the key has no default';
}

interface Setting { line: number; text: string; path: Path; value: unknown; commented: boolean }

/** Every setting of the starter: the YAML's own (with their lines) and the commented-out `# key: value` lines. */
function settings(): Setting[] {
  const lines = STARTER_CAMPAIGN.split('\n');
  const counter = new LineCounter();
  const doc = parseDocument(STARTER_CAMPAIGN, { lineCounter: counter });
  const out: Setting[] = [];
  const sections: { line: number; col: number; path: Path }[] = [];
  const lineOf = (n: Node) => counter.linePos(n.range![0]);
  const walk = (node: unknown, path: Path) => {
    if (isMap(node)) {
      for (const pair of node.items) {
        if (!isPair(pair) || !isScalar(pair.key)) continue;
        const p = [...path, String(pair.key.value)];
        const v = pair.value as Node;
        const { line, col } = lineOf(pair.key as Node);
        if ((isMap(v) || isSeq(v)) && !v.flow) {
          sections.push({ line, col, path: p });
          walk(v, p);
        } else out.push({ line, text: lines[line - 1]!, path: p, value: (v as any)?.toJSON?.() ?? null, commented: false });
      }
    } else if (isSeq(node)) {
      node.items.forEach((it, i) => {
        if (isScalar(it)) {
          const { line } = lineOf(it as Node);
          out.push({ line, text: lines[line - 1]!, path: [...path, i], value: it.value, commented: false });
        } else walk(it, [...path, i]);
      });
    }
  };
  walk(doc.contents, []);
  // Commented-out settings: the section is the last one above that starts left of the '#'.
  lines.forEach((text, i) => {
    const m = /^(\s*)#\s+([a-z_]+):\s+(\S.*?)(\s{2,}#.*)?$/.exec(text);
    if (!m) return;
    const col = m[1]!.length + 1;
    const parent = [...sections].reverse().find((s) => s.line < i + 1 && s.col < col);
    let value: unknown;
    try {
      value = parse(m[3]!);
    } catch {
      return; // prose that happens to hold a colon
    }
    out.push({ line: i + 1, text, path: [...(parent?.path ?? []), m[2]!], value, commented: true });
  });
  return out.sort((a, b) => a.line - b.line);
}

describe('the starter campaign shows defaults where it says so', () => {
  const all = settings();

  it('finds the settings (YAML and commented-out)', () => {
    expect(all.filter((s) => !s.commented).length).toBeGreaterThan(50);
    expect(all.filter((s) => s.commented).length).toBeGreaterThan(15);
  });

  it('each setting line without "edit" shows the schema default', () => {
    const wrong: string[] = [];
    for (const s of all) {
      if (/#.*\bedit\b/.test(s.text)) continue;
      const why = notDefault(s.path, s.value);
      if (!why) continue;
      if (s.commented) {
        if (!schemaAt(s.path)) continue; // an example block's lines (a commented-out list item) name no key path of their own
        if (/default:|absent:|checked only when given/.test(s.text)) continue;
      }
      wrong.push(`starter campaign line ${s.line}: ${show(s.path)}: ${JSON.stringify(s.value)} is shown, but ${why}; mark the line "# edit: ..." (a site-specific value) or show the default\n    ${s.text.trim()}`);
    }
    expect(wrong).toEqual([]);
  });

  it('marks the site-specific values it must (the commands, the system, resources other than the default)', () => {
    const marked = all.filter((s) => /#.*\bedit\b/.test(s.text)).map((s) => show(s.path));
    for (const k of ['name', 'species', 'start', 'stages.label.command', 'stages.train.command', 'stages.validate.command', 'stages.simulate.command']) expect(marked).toContain(k);
  });
});
