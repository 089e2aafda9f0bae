/**
 * A corpus of malformed inputs, generated from a valid campaign (the engine tests' invented argon one,
 * test/engine/fixture.ts) and a valid extended XYZ file: every key misspelt, every value of the wrong
 * type, every bounded number just outside its bounds (the bounds read from the campaign's JSON Schema),
 * YAML broken at many lines, missing files, broken starting structures, broken batch-script templates,
 * bad commands, and extended XYZ files broken in each frame. Each item says what a good refusal names.
 *
 * `npx tsx test/corpus/generate.ts DIR` writes the corpus to DIR for a look by hand; the test
 * (malformed.test.ts) builds it in memory.
 */
import { parseDocument, isMap, isSeq, isScalar, type Document } from 'yaml';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { campaignJsonSchema } from '../../src/campaign/jsonschema.js';
import { BUILTIN_TEMPLATES_DIR } from '../../src/backends/templates.js';
import { campaignYaml, startXyz } from '../engine/fixture.js';

/** A malformed campaign: the files of its folder (campaign.yaml always), and what its refusal must name. */
export interface CampaignItem {
  kind: 'campaign';
  name: string;
  files: Record<string, string | Buffer>;
  /** The key path the first problem names (a prefix is enough: a deeper key is as precise), or undefined when a line is what counts. */
  key?: string;
  /** The file the first problem names, relative to the campaign folder (default campaign.yaml). */
  file?: string;
}

/** A malformed extended XYZ file given to `ratchet check contacts`. */
export interface XyzItem {
  kind: 'xyz';
  name: string;
  text: string | Buffer;
}

export type Item = CampaignItem | XyzItem;

type Path = (string | number)[];
const show = (p: Path) => p.reduce<string>((s, k) => (typeof k === 'number' ? `${s}[${k}]` : s ? `${s}.${k}` : k), '');

/** Every key path of a YAML document (mappings and sequences walked), with the value's JS form. */
function leaves(doc: Document): { path: Path; value: unknown; map: boolean }[] {
  const out: { path: Path; value: unknown; map: boolean }[] = [];
  const walk = (node: unknown, path: Path) => {
    if (isMap(node)) {
      if (path.length) out.push({ path, value: undefined, map: true });
      for (const pair of node.items) walk(pair.value, [...path, String((pair.key as { value: unknown }).value)]);
    } else if (isSeq(node)) {
      node.items.forEach((it, i) => walk(it, [...path, i]));
    } else if (isScalar(node)) {
      out.push({ path, value: node.value, map: false });
    }
  };
  walk(doc.contents, []);
  return out;
}

/** The JSON Schema node of a campaign key path (array indices step into items; anyOf: the first numeric member). */
function schemaAt(path: Path): any {
  let node: any = campaignJsonSchema();
  for (const k of path) {
    if (typeof k === 'number') node = node?.items;
    else node = node?.properties?.[k] ?? node?.anyOf?.find((a: any) => a.properties?.[k])?.properties?.[k];
    if (!node) return undefined;
  }
  if (node.anyOf) return node.anyOf.find((a: any) => a.type === 'number' || a.type === 'integer') ?? node;
  return node;
}

const edit = (base: string, f: (d: Document) => void): string => {
  const d = parseDocument(base);
  f(d);
  return String(d);
};

/** Keys whose value is free text or a free mapping: any string is right there, so no "wrong type" for them. */
const FREE = new Set(['name', 'description']);

export function campaignCorpus(): CampaignItem[] {
  const base = campaignYaml();
  const start = startXyz();
  const items: CampaignItem[] = [];
  const add = (name: string, yaml: string, key?: string, extra: Record<string, string | Buffer> = {}, file?: string) =>
    items.push({ kind: 'campaign', name, files: { 'campaign.yaml': yaml, 'start.xyz': start, ...extra }, key, file });

  const doc = parseDocument(base);
  const all = leaves(doc);

  // 1. An unknown key beside every key (a typo of the key: `<key>_x`).
  for (const { path } of all) {
    if (typeof path[path.length - 1] === 'number') continue;
    const parent = path.slice(0, -1);
    const bad = `${String(path[path.length - 1])}_x`;
    add(`unknown key ${show([...parent, bad])}`, edit(base, (d) => d.setIn([...parent, bad], 1)), show([...parent, bad]));
  }

  // 2. A value of the wrong type for every scalar.
  for (const { path, value, map } of all) {
    if (map || FREE.has(String(path[path.length - 1]))) continue;
    const wrong = typeof value === 'number' || typeof value === 'boolean' ? 'not-a-number' : typeof value === 'string' ? [1, 2] : 'text';
    add(`wrong type at ${show(path)}`, edit(base, (d) => d.setIn(path, wrong)), show(typeof path[path.length - 1] === 'number' ? path.slice(0, -1) : path));
  }

  // 3. Numbers just outside their bounds, and fractions where whole numbers are expected.
  for (const { path, value } of all) {
    if (typeof value !== 'number') continue;
    const s = schemaAt(path);
    if (!s) continue;
    const outside: [string, number][] = [];
    if (typeof s.minimum === 'number') outside.push(['below the minimum', s.minimum - 1]);
    if (typeof s.exclusiveMinimum === 'number') outside.push(['at the exclusive minimum', s.exclusiveMinimum]);
    if (typeof s.maximum === 'number') outside.push(['above the maximum', s.maximum + 1]);
    if (typeof s.exclusiveMaximum === 'number') outside.push(['at the exclusive maximum', s.exclusiveMaximum]);
    if (s.type === 'integer') outside.push(['a fraction for a whole number', Math.max(s.minimum ?? 0, 0) + 1.5]);
    for (const [why, v] of outside) add(`${show(path)}: ${why} (${v})`, edit(base, (d) => d.setIn(path, v)), show(path));
  }

  // 4. Required keys left out.
  for (const key of ['name', 'species', 'start', 'conditions', 'stages']) add(`required key ${key} left out`, edit(base, (d) => d.deleteIn([key])), key);
  for (const key of ['temperature', 'steps', 'name']) add(`required key conditions[0].${key} left out`, edit(base, (d) => d.deleteIn(['conditions', 0, key])), `conditions[0]`);
  add('a stage without its command', edit(base, (d) => d.deleteIn(['stages', 'train', 'command'])), 'stages.train');

  // 5. Values valid in type and range, wrong in meaning.
  add('an unknown element symbol', edit(base, (d) => d.setIn(['species'], ['Xx'])), 'species');
  add('a species listed twice', edit(base, (d) => d.setIn(['species'], ['Ar', 'Ar'])), 'species');
  add('two conditions with one name', edit(base, (d) => d.setIn(['conditions', 1, 'name'], 'cold')), 'conditions');
  add('a condition name with a slash', edit(base, (d) => d.setIn(['conditions', 0, 'name'], 'a/b')), 'conditions[0].name');
  add('an unknown backend', edit(base, (d) => d.setIn(['backend', 'kind'], 'kubernetes')), 'backend.kind');
  add('a malformed walltime', edit(base, (d) => d.setIn(['stages', 'label', 'resources'], { walltime: '2 hours' })), 'stages.label.resources.walltime');
  add('a malformed memory', edit(base, (d) => d.setIn(['stages', 'label', 'resources'], { memory: 'lots' })), 'stages.label.resources.memory');
  add('a condition start index past the list', edit(base, (d) => d.setIn(['conditions', 0, 'start'], 5)), 'conditions[0].start');
  add('a window with lower above upper', edit(base, (d) => d.setIn(['stages', 'sample', 'select', 'window'], { lower: 0.6, upper: 0.5 })), 'stages.sample.select.window');
  add('a parameter name with a dash', edit(base, (d) => d.setIn(['stages', 'train', 'params'], { 'learning-rate': 1 })), 'stages.train.params');

  // 6. YAML that does not parse, broken at many lines (every key line in turn).
  const lines = base.split('\n');
  const keyLines = lines.map((l, i) => [l, i] as const).filter(([l]) => /^\s*(- )?[a-z_]+: \S/.test(l));
  keyLines.forEach(([l, i], n) => {
    const broken = [...lines];
    const indent = /^\s*/.exec(l)![0];
    switch (n % 4) {
      case 0:
        broken.splice(i + 1, 0, `${indent}\tstray: 1`); // a tab where indentation belongs
        break;
      case 1:
        broken[i] = l.replace(/: .*$/, ': "unclosed'); // a quote never closed
        break;
      case 2:
        broken[i] = l.replace(/: .*$/, ': [a, b'); // a list never closed
        break;
      default:
        broken.splice(i + 1, 0, l.replace(/^(\s*)- /, '$1  ')); // the same key twice
    }
    add(`YAML broken at line ${i + 1} (${['tab', 'unclosed quote', 'unclosed list', 'duplicate key'][n % 4]})`, broken.join('\n'));
  });
  add('an empty campaign file', '');
  add('only comments', '# nothing here\n');
  add('a list at the top', '- a\n- b\n');
  add('a plain word at the top', 'campaign\n');
  add('a YAML alias to nowhere', base.replace('species: [Ar]', 'species: *nowhere'));
  add('binary bytes in the campaign file', '', undefined, { 'campaign.yaml': Buffer.from([0x6e, 0x61, 0x6d, 0x65, 0x3a, 0x20, 0xff, 0xfe, 0x00, 0x0a]) });

  // 7. Files that are missing or are not files.
  add('a missing starting structure', edit(base, (d) => d.setIn(['start'], 'missing.xyz')), 'start');
  add('a missing second starting structure', edit(base, (d) => d.setIn(['start'], ['start.xyz', 'missing.xyz'])), 'start');
  add('a folder as the starting structure', edit(base, (d) => d.setIn(['start'], 'folder')), 'start', { 'folder/keep': 'x' });
  add('a missing condition start file', edit(base, (d) => d.setIn(['conditions', 0, 'start'], 'missing.xyz')), 'conditions[0].start');
  add('a missing program', edit(base, (d) => d.setIn(['stages', 'train', 'programs'], ['missing.py'])), 'stages.train.programs');
  add('a missing template folder', edit(base, (d) => d.setIn(['backend', 'template_dir'], 'missing-tpl')), 'backend.template_dir');

  // 8. Starting structures that are not physical or not readable (the structure file is named, or start).
  const xyz = (atoms: string[], lattice = 'Lattice="5.26 0 0 0 5.26 0 0 0 5.26" ') =>
    `${atoms.length}\n${lattice}Properties=species:S:1:pos:R:3 pbc="T T T"\n${atoms.join('\n')}\n`;
  const structures: [string, string][] = [
    ['no atoms', '0\nLattice="5 0 0 0 5 0 0 0 5" Properties=species:S:1:pos:R:3 pbc="T T T"\n'],
    ['a NaN position', xyz(['Ar 0 0 0', 'Ar nan 2 2'])],
    ['an infinite position', xyz(['Ar 0 0 0', 'Ar inf 2 2'])],
    ['a flat cell (zero volume)', xyz(['Ar 0 0 0', 'Ar 2 2 0'], 'Lattice="5 0 0 0 5 0 0 0 0" ')],
    ['every atom at one point', xyz(['Ar 1 1 1', 'Ar 1 1 1', 'Ar 1 1 1'])],
    ['two atoms 0.1 Å apart', xyz(['Ar 0 0 0', 'Ar 0.1 0 0'])],
    ['a species not in the campaign', xyz(['Ar 0 0 0', 'Kr 2.6 2.6 0'])],
    ['an unknown element', xyz(['Ar 0 0 0', 'Qq 2.6 2.6 0'])],
    ['a count larger than the atoms', '3\nLattice="5.26 0 0 0 5.26 0 0 0 5.26" Properties=species:S:1:pos:R:3 pbc="T T T"\nAr 0 0 0\nAr 2.6 2.6 0\n'],
    ['a count that is a word', 'two\nLattice="5.26 0 0 0 5.26 0 0 0 5.26" Properties=species:S:1:pos:R:3 pbc="T T T"\nAr 0 0 0\nAr 2.6 2.6 0\n'],
    ['a coordinate that is a word', xyz(['Ar 0 0 0', 'Ar x 2.6 0'])],
    ['a missing coordinate', xyz(['Ar 0 0 0', 'Ar 2.6 2.6'])],
    ['a lattice of eight numbers', xyz(['Ar 0 0 0', 'Ar 2.6 2.6 0'], 'Lattice="5 0 0 0 5 0 0 0" ')],
    ['an empty file', ''],
  ];
  for (const [why, text] of structures) add(`starting structure: ${why}`, base, undefined, { 'start.xyz': text }, 'start.xyz');

  // 9. Batch-script templates that would make broken scripts (named through backend.template_dir).
  const builtin = (n: string) => readFileSync(join(BUILTIN_TEMPLATES_DIR, n), 'utf8');
  const withTpl = edit(base, (d) => d.setIn(['backend', 'template_dir'], 'tpl'));
  const templates: [string, Record<string, string | Buffer>][] = [
    ['a misspelt placeholder', { 'tpl/common.sh': builtin('common.sh').replace('{{task_dir}}', '{{task_dri}}') }],
    ['an unclosed placeholder', { 'tpl/common.sh': builtin('common.sh') + '\necho {{task_dir\n' }],
    ['a header without #!', { 'tpl/local.sh': builtin('local.sh').replace(/^#![^\n]*\n/, '') }],
    ['a body without {{command}}', { 'tpl/common.sh': builtin('common.sh').replaceAll('{{command}}', 'true') }],
    ['a binary template', { 'tpl/common.sh': Buffer.from([0x23, 0x21, 0xff, 0xfe, 0x00, 0x01]) }],
  ];
  for (const [why, files] of templates) add(`template: ${why}`, withTpl, 'backend.template_dir', files);

  // 10. Commands that cannot run.
  for (const stage of ['label', 'train', 'validate', 'simulate']) {
    add(`a blank ${stage} command`, edit(base, (d) => d.setIn(['stages', stage, 'command'], '   ')), `stages.${stage}.command`);
    add(`a ${stage} command with a NUL byte`, edit(base, (d) => d.setIn(['stages', stage, 'command'], 'run\0me')), `stages.${stage}.command`);
    add(`a ${stage} set-up line with a NUL byte`, edit(base, (d) => d.setIn(['stages', stage, 'setup'], ['module load x\0'])), `stages.${stage}.setup`);
  }
  return items;
}

/** A valid 3-frame extended XYZ file of 2 argon atoms 3.8 Å apart, broken in frame `k` in one way. */
export function xyzCorpus(): XyzItem[] {
  const frame = (k: number) => `2\nLattice="10 0 0 0 10 0 0 0 10" Properties=species:S:1:pos:R:3 pbc="T T T" energy=${-0.1 * k}\nAr 1 1 1\nAr 4.8 1 1\n`;
  const breaks: [string, (f: string) => string][] = [
    ['a count that is a word', (f) => f.replace(/^2\n/, 'two\n')],
    ['a negative count', (f) => f.replace(/^2\n/, '-2\n')],
    ['a coordinate that is a word', (f) => f.replace('Ar 4.8 1 1', 'Ar 4.8 x 1')],
    ['a missing coordinate', (f) => f.replace('Ar 4.8 1 1', 'Ar 4.8 1')],
    ['a missing atom line', (f) => f.replace('Ar 4.8 1 1\n', '')],
    ['a lattice of eight numbers', (f) => f.replace('Lattice="10 0 0 0 10 0 0 0 10"', 'Lattice="10 0 0 0 10 0 0 0"')],
    ['a lattice with a word', (f) => f.replace('Lattice="10 0 0 0 10 0 0 0 10"', 'Lattice="10 0 0 0 ten 0 0 0 10"')],
    ['Properties with an unknown type', (f) => f.replace('pos:R:3', 'pos:Q:3')],
    ['Properties with a column count that is a word', (f) => f.replace('pos:R:3', 'pos:R:three')],
    ['Properties naming more columns than the lines have', (f) => f.replace('pos:R:3', 'pos:R:3:forces:R:3')],
    ['an unclosed quote in the comment line', (f) => f.replace('pbc="T T T"', 'pbc="T T T')],
    ['a pbc of two flags', (f) => f.replace('pbc="T T T"', 'pbc="T T"')],
  ];
  const items: XyzItem[] = [];
  for (const [why, brk] of breaks) {
    for (const k of [0, 1, 2]) items.push({ kind: 'xyz', name: `frame ${k}: ${why}`, text: [0, 1, 2].map((j) => (j === k ? brk(frame(j)) : frame(j))).join('') });
  }
  items.push({ kind: 'xyz', name: 'an empty XYZ file', text: '' });
  items.push({ kind: 'xyz', name: 'blank lines only', text: '\n\n\n' });
  items.push({ kind: 'xyz', name: 'binary bytes in an XYZ file', text: Buffer.from([0xff, 0xfe, 0x00, 0x01, 0x02, 0x0a]) });
  return items;
}

export function corpus(): Item[] {
  return [...campaignCorpus(), ...xyzCorpus()];
}

// `npx tsx test/corpus/generate.ts DIR`: write every item to DIR/<n>/ for a look by hand.
if (process.argv[1] && /generate\.ts$/.test(process.argv[1]) && process.argv[2]) {
  const { mkdirSync, writeFileSync } = await import('node:fs');
  const { dirname } = await import('node:path');
  corpus().forEach((item, n) => {
    const dir = join(process.argv[2]!, String(n).padStart(3, '0'));
    const files = item.kind === 'campaign' ? item.files : { 'frames.xyz': item.text };
    for (const [f, t] of Object.entries(files)) {
      mkdirSync(dirname(join(dir, f)), { recursive: true });
      writeFileSync(join(dir, f), t);
    }
    writeFileSync(join(dir, 'ITEM.txt'), `${item.name}\n`);
  });
  process.stdout.write(`${corpus().length} items written to ${process.argv[2]}\n`);
}
