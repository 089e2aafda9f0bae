/**
 * Loading a campaign file: YAML with line-aware errors, the zod schema, and checks of the files it names.
 *
 * Every problem becomes one line `file:line:column: key.path: what was expected, found what`, with
 * "did you mean '...'?" for a typo of a key or a choice. All problems of a file are reported at once,
 * in file order; the first one also fills the error's fields.
 */
import { createHash } from 'node:crypto';
import { constants as fsConstants } from 'node:fs';
import { access, readFile, stat } from 'node:fs/promises';
import { dirname, resolve } from 'node:path';
import { isAlias, isMap, isScalar, isSeq, LineCounter, parseDocument, type Document, type Node } from 'yaml';
import type { z } from 'zod';
import { isElement } from '../atoms/elements.js';
import { readFrames, XyzError } from '../atoms/xyz/reader.js';
import { structureIssue } from '../atoms/sanity.js';
import { clearTemplateCache, loadTemplates, TemplateError } from '../backends/templates.js';
import { contactsFrame } from '../gates/contacts.js';
import { campaignJsonSchema, keyIndex, keysAt, type JsonSchema } from './jsonschema.js';
import { CampaignSchema, RENAMED_KEYS, type Campaign, type Condition } from './schema.js';
import { nearest } from './suggest.js';

export type KeyPath = readonly (string | number)[];

/** One problem in a campaign file. */
export interface CampaignProblem {
  file: string;
  /** 1-based; undefined when the problem is with the file as a whole (cannot be read). */
  line?: number;
  column?: number;
  /** Dotted key path with [i] for list items, e.g. "stages.label.resources.walltime" ("" for the whole file). */
  keyPath: string;
  /** What is wrong, e.g. 'expected a walltime like "02:00:00" ..., found "-1"'. */
  detail: string;
  /** The nearest valid key or value, for a typo. */
  suggestion?: string;
}

/** A campaign file that cannot be used. `message` holds every problem, one per line. */
export class CampaignError extends Error {
  override name = 'CampaignError';
  readonly file: string;
  readonly line?: number;
  readonly column?: number;
  readonly keyPath: string;
  readonly detail: string;
  readonly suggestion?: string;
  readonly problems: CampaignProblem[];

  constructor(problems: CampaignProblem[]) {
    super(problems.map(formatProblem).join('\n'));
    const first = problems[0]!;
    this.file = first.file;
    this.line = first.line;
    this.column = first.column;
    this.keyPath = first.keyPath;
    this.detail = first.detail;
    this.suggestion = first.suggestion;
    this.problems = problems;
  }
}

/** `file:line:col: key.path: detail` (parts left out when unknown). */
export function formatProblem(p: CampaignProblem): string {
  const where = p.line === undefined ? p.file : `${p.file}:${p.line}:${p.column ?? 1}`;
  return p.keyPath ? `${where}: ${p.keyPath}: ${p.detail}` : `${where}: ${p.detail}`;
}

export interface LoadedCampaign {
  campaign: Campaign;
  /** Absolute directory of the campaign file: relative paths in the campaign are resolved against it. */
  dir: string;
  /** Absolute path of the campaign file. */
  file: string;
  /** sha256 (hex) of the file's bytes. */
  sha256: string;
}

export interface LoadOptions {
  /** Check that the files the campaign names exist and are readable (default true). */
  checkFiles?: boolean;
}

const MAX_PROBLEMS = 20;

/** Read, parse and check a campaign file. Throws CampaignError naming file, line, column and key. */
export async function loadCampaign(path: string, opts: LoadOptions = {}): Promise<LoadedCampaign> {
  let bytes: Buffer;
  try {
    bytes = await readFile(path);
  } catch (err) {
    throw new CampaignError([{ file: path, keyPath: '', detail: `cannot read the campaign file: ${fsReason(err)}` }]);
  }
  const sha256 = createHash('sha256').update(bytes).digest('hex');
  let text: string;
  try {
    text = new TextDecoder('utf-8', { fatal: true }).decode(bytes);
  } catch {
    throw new CampaignError([{ file: path, line: 1, column: 1, keyPath: '', detail: 'expected a UTF-8 text file' }]);
  }
  const file = resolve(path);
  const dir = dirname(file);
  let campaign: ReturnType<typeof parseCampaignText>;
  try {
    campaign = parseCampaignText(text, path);
  } catch (err) {
    if (!(err instanceof SchemaProblems) || opts.checkFiles === false) throw err;
    const more = await rawStartProblems(err, dir, path);
    if (more.length === 0) throw err;
    const all = [...err.problems, ...more].sort((a, b) => (a.line ?? 0) - (b.line ?? 0) || (a.column ?? 0) - (b.column ?? 0));
    throw new CampaignError(all.slice(0, MAX_PROBLEMS));
  }
  if (opts.checkFiles !== false) await checkFiles(campaign.campaign, campaign.startIsList, campaign.locate, dir, path);
  return { campaign: campaign.campaign, dir, file, sha256 };
}

type Locate = (path: KeyPath, at: 'key' | 'value') => { line: number; column: number };

/**
 * Parse campaign YAML text (no file checks). `file` is only used in messages.
 * Exposed for tests and for tools that hold the text already.
 */
export function parseCampaignText(text: string, file: string): { campaign: Campaign; locate: Locate; startIsList: boolean } {
  const lineCounter = new LineCounter();
  const doc = parseDocument(text, { lineCounter, keepSourceTokens: true, prettyErrors: false, uniqueKeys: true });
  const pos = (offset: number) => {
    const lp = lineCounter.linePos(offset);
    return { line: lp.line, column: lp.col };
  };
  if (doc.errors.length > 0) {
    throw new CampaignError(
      doc.errors.slice(0, MAX_PROBLEMS).map((e) => {
        let detail = `YAML syntax: ${e.message}`;
        if (e.code === 'DUPLICATE_KEY') {
          const key = /^[^:\n]*/.exec(text.slice(e.pos[0]))![0].trim();
          if (key) detail += ` ('${key}' appears twice)`;
        }
        return { file, ...pos(e.pos[0]), keyPath: '', detail };
      }),
    );
  }
  const locate: Locate = (path, at) => locateIn(doc, path, at, pos);
  let data: unknown;
  try {
    data = doc.toJS({ maxAliasCount: 1000 });
  } catch (err) {
    // The yaml library refuses documents whose aliases expand without bound ("billion laughs").
    if (/alias/i.test((err as Error).message)) {
      throw new CampaignError([
        { file, line: 1, column: 1, keyPath: '', detail: 'expected a campaign file, found YAML whose aliases (*name) expand to too much data (over 1000 expansions); write the values out or use fewer aliases' },
      ]);
    }
    throw err;
  }
  if (data === null || typeof data !== 'object' || Array.isArray(data)) {
    throw new CampaignError([
      { file, ...(doc.contents ? pos(doc.contents.range[0]) : { line: 1, column: 1 }), keyPath: '', detail: `expected a mapping of campaign settings (key: value lines), found ${describe(data, true)}` },
    ]);
  }
  emptySectionsAsMappings(data as Record<string, unknown>, campaignJsonSchema(), []);
  const result = CampaignSchema.safeParse(data);
  if (result.success) return { campaign: result.data, locate, startIsList: Array.isArray((data as { start?: unknown }).start) };
  throw new SchemaProblems(issuesToProblems(result.error.issues, data, file, locate), data as Record<string, unknown>, locate);
}

/** Schema problems, with what a loader needs to look for more (file problems) in the same pass. */
class SchemaProblems extends CampaignError {
  constructor(
    problems: CampaignProblem[],
    readonly data: Record<string, unknown>,
    readonly locate: Locate,
  ) {
    super(problems);
  }
}

/**
 * The starting structures a campaign that failed its schema names (written as a path or a list of
 * paths), so their problems come in the same report as the keys' (a key typo must not hide a missing file).
 */
async function rawStartProblems(e: SchemaProblems, dir: string, file: string): Promise<CampaignProblem[]> {
  const start = e.data.start;
  const list = typeof start === 'string' ? [start] : Array.isArray(start) ? start : [];
  const out: CampaignProblem[] = [];
  for (const [i, rel] of list.entries()) {
    if (typeof rel !== 'string' || rel === '') continue;
    const path: KeyPath = typeof start === 'string' ? ['start'] : ['start', i];
    const keyPath = formatKeyPath(path);
    if (e.problems.some((p) => p.keyPath === keyPath)) continue;
    const abs = resolve(dir, rel);
    const reason = await unreadable(abs, 'file');
    if (reason) out.push({ file, ...e.locate(path, 'value'), keyPath, detail: `cannot read starting structure ${JSON.stringify(rel)}${abs === rel ? '' : ` (${abs})`}: ${reason}` });
  }
  return out;
}

/**
 * A section written with nothing under it (`budget:` followed only by comments) reads as YAML null;
 * where the schema expects a mapping with fixed keys, it is read as an empty mapping (its defaults apply,
 * and a missing required key inside it is named).
 */
function emptySectionsAsMappings(obj: Record<string, unknown>, schema: JsonSchema, path: (string | number)[]): void {
  for (const [key, value] of Object.entries(obj)) {
    const here = [...path, key];
    if (value === null) {
      if (keysAt(schema, here).length > 0) obj[key] = {};
    } else if (typeof value === 'object' && !Array.isArray(value)) {
      emptySectionsAsMappings(value as Record<string, unknown>, schema, here);
    }
  }
}

function issuesToProblems(issues: z.core.$ZodIssue[], data: unknown, file: string, locate: Locate): CampaignProblem[] {
  const schema = campaignJsonSchema();
  const problems: (CampaignProblem & { order: number })[] = [];
  const seen = new Set<string>();
  issues.forEach((issue, order) => {
    for (const p of issueToProblems(issue, data, file, locate, schema)) {
      const key = `${p.keyPath}\u0000${p.line}`;
      if (seen.has(key)) continue; // one problem per key: the first check that failed
      seen.add(key);
      problems.push({ ...p, order });
    }
  });
  // A key reported missing while a typo of it is reported unknown in the same place says the same thing twice.
  const suggested = new Set(problems.filter((p) => p.suggestion && p.detail.startsWith('unknown key')).map((p) => p.keyPath.replace(/[^.[\]]+$/, p.suggestion!)));
  const kept = problems.filter((p) => !(p.detail.startsWith('missing;') && suggested.has(p.keyPath)));
  kept.sort((a, b) => (a.line ?? 0) - (b.line ?? 0) || (a.column ?? 0) - (b.column ?? 0) || a.order - b.order);
  return kept.slice(0, MAX_PROBLEMS).map(({ order: _order, ...p }) => p);
}

function issueToProblems(issue: z.core.$ZodIssue, data: unknown, file: string, locate: Locate, schema: JsonSchema): CampaignProblem[] {
  const path = issue.path as (string | number)[];
  if (issue.code === 'unrecognized_keys') {
    const valid = keysAt(schema, path);
    return issue.keys.map((key) => {
      const full = [...path, key];
      const near = nearest(key, valid);
      const renamed = RENAMED_KEYS[key];
      let detail: string;
      if (renamed !== undefined && valid.includes(renamed)) detail = `'${key}' was renamed: write '${renamed}' instead (same meaning)`;
      else if (near) detail = `unknown key; did you mean '${near}'?`;
      else {
        const elsewhere = keyIndex(schema).get(key);
        detail = elsewhere
          ? `unknown key here; '${key}' belongs under ${elsewhere.map((p) => (p.includes('.') ? p.slice(0, p.lastIndexOf('.')) : 'the top level')).join(' or ')}`
          : `unknown key; expected one of: ${valid.join(', ')}`;
      }
      return { file, ...locate(full, 'key'), keyPath: formatKeyPath(full), detail, ...(near ? { suggestion: near } : {}) };
    });
  }
  if (issue.code === 'invalid_key') {
    const key = path[path.length - 1];
    const inner = issue.issues[0]?.message ?? 'expected a valid key';
    const expected = inner.startsWith('expected') ? inner : 'expected a valid key';
    return [{ file, ...locate(path, 'key'), keyPath: formatKeyPath(path), detail: `${expected}, found the key ${JSON.stringify(String(key))}` }];
  }
  const value = valueAt(data, path);
  const keyPath = formatKeyPath(path);
  const at = issue.code === 'custom' && (issue.params as { at?: string } | undefined)?.at === 'key' ? 'key' : 'value';
  let expected = issue.message;
  if (!expected.startsWith('expected')) expected = defaultExpected(issue);
  if (value.missing) {
    return [{ file, ...locate(path, 'value'), keyPath, detail: `missing; ${expected}` }];
  }
  let suggestion: string | undefined;
  if (issue.code === 'invalid_value' && typeof value.value === 'string' && path[0] !== 'species') {
    suggestion = nearest(value.value, issue.values.map(String));
  }
  if (path[0] === 'species' && typeof value.value === 'string' && path.length === 2) {
    const fixed = value.value.charAt(0).toUpperCase() + value.value.slice(1).toLowerCase();
    if (fixed !== value.value && isElement(fixed)) suggestion = fixed;
  }
  let detail = /\bfound\b/.test(expected) ? expected : `${expected}, found ${describe(value.value)}`;
  if (suggestion) detail += `; did you mean '${suggestion}'?`;
  return [{ file, ...locate(path, at), keyPath, detail, ...(suggestion ? { suggestion } : {}) }];
}

/** Wording for zod's built-in issues when a schema gave no message of its own. */
function defaultExpected(issue: z.core.$ZodIssue): string {
  switch (issue.code) {
    case 'invalid_type':
      return `expected ${article(issue.expected)}`;
    case 'too_small':
      return `expected ${issue.origin === 'array' ? `at least ${issue.minimum} item(s)` : `a value ${issue.inclusive ? '>=' : '>'} ${issue.minimum}`}`;
    case 'too_big':
      return `expected ${issue.origin === 'array' ? `at most ${issue.maximum} item(s)` : `a value ${issue.inclusive ? '<=' : '<'} ${issue.maximum}`}`;
    case 'invalid_value':
      return `expected one of ${issue.values.map((v) => JSON.stringify(v)).join(', ')}`;
    default:
      return `expected a valid value (${issue.message})`;
  }
}

function article(type: string): string {
  const names: Record<string, string> = { object: 'a mapping', array: 'a list', string: 'a string', number: 'a number', boolean: 'true or false', int: 'a whole number' };
  return names[type] ?? type;
}

/** A value as a message shows it: strings quoted, lists and mappings by kind. */
export function describe(value: unknown, whole = false): string {
  if (value === undefined) return 'nothing';
  if (value === null) return whole ? 'an empty file' : 'nothing (an empty value)';
  if (typeof value === 'string') return JSON.stringify(value);
  if (typeof value === 'number' || typeof value === 'boolean') return String(value);
  if (Array.isArray(value)) return 'a list';
  if (typeof value === 'object') return 'a mapping';
  return String(value);
}

/** "stages.label.resources.walltime", "conditions[2].temperature", 'contacts.min_distance["O-H"]'. */
export function formatKeyPath(path: KeyPath): string {
  let out = '';
  for (const seg of path) {
    if (typeof seg === 'number') out += `[${seg}]`;
    else if (/^[A-Za-z_][A-Za-z0-9_]*$/.test(seg)) out += out ? `.${seg}` : seg;
    else out += `[${JSON.stringify(seg)}]`;
  }
  return out;
}

function valueAt(data: unknown, path: KeyPath): { missing: boolean; value: unknown } {
  let node: unknown = data;
  for (const seg of path) {
    if (node === null || typeof node !== 'object' || !(seg in (node as object))) return { missing: true, value: undefined };
    node = (node as Record<string | number, unknown>)[seg];
  }
  return { missing: node === undefined, value: node };
}

/**
 * Line and column of a key path in the document: of the key itself ('key') or of its value ('value').
 * A path that stops early (a missing key) points at the deepest key that exists.
 */
function locateIn(doc: Document, path: KeyPath, at: 'key' | 'value', pos: (offset: number) => { line: number; column: number }) {
  let node: unknown = doc.contents;
  let anchor: Node | null = isNode(node) ? node : null;
  let keyNode: Node | null = null;
  let complete = true;
  for (const seg of path) {
    if (isAlias(node)) node = node.resolve(doc);
    if (isMap(node)) {
      const pair = node.items.find((p) => (isScalar(p.key) ? String(p.key.value) : String(p.key)) === String(seg));
      if (!pair) {
        complete = false;
        break;
      }
      keyNode = isNode(pair.key) ? pair.key : keyNode;
      node = pair.value;
      anchor = isNode(node) ? node : keyNode;
    } else if (isSeq(node) && typeof seg === 'number' && seg < node.items.length) {
      node = node.items[seg];
      keyNode = isNode(node) ? node : keyNode;
      anchor = keyNode;
    } else {
      complete = false;
      break;
    }
  }
  const target = complete ? (at === 'key' ? keyNode : anchor) : (keyNode ?? anchor);
  return target?.range ? pos(target.range[0]) : { line: 1, column: 1 };
}

function isNode(v: unknown): v is Node {
  return typeof v === 'object' && v !== null && 'range' in v;
}

// ---------------------------------------------------------------------------------------------
// Files the campaign names

/** Absolute paths of the starting structures. */
export function startPaths(campaign: Campaign, dir: string): string[] {
  return campaign.start.map((p) => resolve(dir, p));
}

/** Absolute path of the structure a condition starts from. */
export function conditionStartPath(campaign: Campaign, dir: string, condition: Condition): string {
  return typeof condition.start === 'number' ? resolve(dir, campaign.start[condition.start]!) : resolve(dir, condition.start);
}

async function checkFiles(campaign: Campaign, startIsList: boolean, locate: Locate, dir: string, file: string): Promise<void> {
  const problems: CampaignProblem[] = [];
  const checked = new Set<string>();
  const check = async (path: KeyPath, rel: string, what: string, kind: 'file' | 'dir' | 'any') => {
    const abs = resolve(dir, rel);
    const at = () => ({ file, ...locate(path, 'value'), keyPath: formatKeyPath(path) });
    const reason = await unreadable(abs, kind);
    if (reason) {
      const shown = abs === rel ? JSON.stringify(rel) : `${JSON.stringify(rel)} (${abs})`;
      problems.push({ ...at(), detail: `cannot read ${what} ${shown}: ${reason}` });
      return;
    }
    if (kind === 'file' && !checked.has(abs)) {
      checked.add(abs);
      const detail = await structureProblem(abs, rel, campaign);
      if (detail) problems.push({ ...at(), detail });
    }
  };
  for (const [i, rel] of campaign.start.entries()) {
    // `start: one.xyz` is written as a single path: name it `start`, not `start[0]`.
    const path: KeyPath = startIsList ? ['start', i] : ['start'];
    await check(path, rel, 'starting structure', 'file');
  }
  for (const [i, cond] of campaign.conditions.entries()) {
    if (typeof cond.start === 'string') await check(['conditions', i, 'start'], cond.start, 'starting structure', 'file');
  }
  if (campaign.backend.template_dir !== undefined) {
    const before = problems.length;
    await check(['backend', 'template_dir'], campaign.backend.template_dir, 'template folder', 'dir');
    // The templates themselves, as a run would load them: placeholders, #! header, {{command}} in the body, text only.
    if (problems.length === before) {
      try {
        clearTemplateCache();
        loadTemplates(campaign.backend.kind, resolve(dir, campaign.backend.template_dir));
      } catch (err) {
        if (!(err instanceof TemplateError)) throw err;
        problems.push({ file, ...locate(['backend', 'template_dir'], 'value'), keyPath: 'backend.template_dir', detail: `expected usable batch-script templates, but ${err.message}` });
      }
    }
  }
  // Programs a stage's command runs (a file or a folder each): hashed into the ledger when tasks start.
  for (const [stage, st] of Object.entries(campaign.stages)) {
    for (const [i, rel] of (st.programs ?? []).entries()) await check(['stages', stage, 'programs', i], rel, 'program', 'any');
  }
  if (problems.length > 0) throw new CampaignError(problems);
}

/**
 * What is wrong with a starting structure's content, if anything: it must be extended XYZ with at least
 * one frame, and hold only the campaign's species. Every frame is read (species and positions only).
 */
async function structureProblem(abs: string, rel: string, campaign: Campaign): Promise<string | undefined> {
  const species = campaign.species;
  const allowed = new Set(species);
  const c = campaign.stages.simulate.contacts as { scale: number; min_distance: Record<string, number>; hydrogen_scale?: number };
  let index = 0;
  try {
    for await (const frame of readFrames(abs, { columns: [] })) {
      const stranger = frame.species.find((s) => !allowed.has(s));
      if (stranger !== undefined) {
        return `expected structures of the campaign's species (${species.join(', ')}), found "${stranger}" in frame ${index} of ${JSON.stringify(rel)}`;
      }
      const issue = structureIssue(frame);
      if (issue) return `expected a structure that can be simulated, but frame ${index} of ${JSON.stringify(rel)}: ${issue}`;
      // No pair closer than the contacts limit of the simulate stage (the strictest place a structure goes).
      const con = contactsFrame(frame, index, {
        scale: c.scale,
        pairLimits: c.min_distance,
        ...(c.hydrogen_scale !== undefined ? { hydrogenScale: c.hydrogen_scale } : {}),
        maxPerFrame: 1,
      });
      if (con.missing) return `cannot check contacts in frame ${index} of ${JSON.stringify(rel)}: ${con.missing}`;
      if (con.violationCount > 0) {
        const v = con.violations[0];
        return (
          `expected no pair closer than the contacts limit (stages.simulate.contacts), but frame ${index} of ${JSON.stringify(rel)} has atoms ${v.i} and ${v.j} ` +
          `(${v.species.join('-')}) ${v.distance.toFixed(4)} Å apart, below ${v.limit.toFixed(4)} Å` +
          (con.violationCount > 1 ? ` (${con.violationCount} close pairs in all)` : '')
        );
      }
      index++;
    }
  } catch (err) {
    if (err instanceof XyzError) return `cannot read starting structure ${JSON.stringify(rel)}: ${err.message}`;
    throw err;
  }
  return index === 0 ? `expected at least one frame in starting structure ${JSON.stringify(rel)}, found an empty file` : undefined;
}

async function unreadable(abs: string, kind: 'file' | 'dir' | 'any'): Promise<string | undefined> {
  try {
    const st = await stat(abs);
    if (kind === 'file' && !st.isFile()) return st.isDirectory() ? 'it is a directory, expected a file' : 'not a regular file';
    if (kind === 'dir' && !st.isDirectory()) return 'not a directory';
    await access(abs, fsConstants.R_OK);
    return undefined;
  } catch (err) {
    return fsReason(err);
  }
}

function fsReason(err: unknown): string {
  const code = (err as NodeJS.ErrnoException)?.code;
  switch (code) {
    case 'ENOENT':
      return 'no such file or directory';
    case 'EACCES':
    case 'EPERM':
      return 'permission denied';
    case 'EISDIR':
      return 'it is a directory, expected a file';
    case 'ENOTDIR':
      return 'a part of the path is not a directory';
    default:
      return err instanceof Error ? err.message : String(err);
  }
}
