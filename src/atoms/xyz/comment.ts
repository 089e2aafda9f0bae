/**
 * The comment line (second line of a frame) of extended XYZ: key=value pairs.
 *
 * Follows the open extended XYZ specification (libAtoms/extxyz README, "key=value pairs"):
 * - keys are bare or double-quoted; spaces are allowed around '='; a key without '=' is a flag (true);
 * - values: bare tokens (typed int, real, logical, string in that order); double-quoted strings with
 *   backslash escapes (\" for a quote, \\ for a backslash, \n for a newline); a quoted or {…} value holding
 *   several whitespace-separated numbers or logicals is an array (old style; one element gives a scalar);
 *   [a, b, c] is an array (new style; [[…], […]] matrices are flattened row by row);
 * - Lattice (9 numbers: a, b, c as rows), Properties (columns) and pbc (3 logicals) are taken out of info;
 *   their names are matched without regard to case.
 * A line without a Properties= or Lattice= key is a plain XYZ comment: kept whole as info `comment`.
 */
import type { InfoValue, Pbc } from '../frame.js';
import { XyzError, shown, type Where } from './errors.js';
import { boolOf, commonType, numberOf, scalarOf } from './values.js';

export interface Comment {
  /** False for a plain XYZ comment line (no Properties= and no Lattice=). */
  extended: boolean;
  /** The Properties value as written, or null. */
  properties: string | null;
  lattice: Float64Array | null;
  pbc: Pbc | null;
  info: Map<string, InfoValue>;
}

const LOOKS_EXTENDED = /(?:^|[\s"])(?:properties|lattice)"?\s*=/i;

interface Value {
  value: InfoValue;
  /** The text as written (for Properties): quoted content unescaped, or the bare token. */
  raw: string;
  /** 1-based column where the value starts. */
  col: number;
}

class CommentParser {
  private i = 0;
  private readonly n: number;
  constructor(
    private readonly s: string,
    private readonly file: string,
    private readonly lineNo: number,
  ) {
    this.n = s.length;
  }

  fail(detail: string): never {
    throw new XyzError(this.file, this.lineNo, detail);
  }

  private isWs(ch: string): boolean {
    return ch === ' ' || ch === '\t' || ch === '\r' || ch === '\n' || ch === '\f' || ch === '\v';
  }

  private skipWs(): void {
    while (this.i < this.n && this.isWs(this.s[this.i])) this.i++;
  }

  /** A double-quoted string starting at this.i; returns its unescaped content. */
  private quoted(what: string): string {
    const open = this.i;
    let out = '';
    let j = open + 1;
    while (j < this.n) {
      const ch = this.s[j];
      if (ch === '\\' && j + 1 < this.n) {
        const next = this.s[j + 1];
        out += next === 'n' ? '\n' : next;
        j += 2;
        continue;
      }
      if (ch === '"') {
        this.i = j + 1;
        return out;
      }
      out += ch;
      j++;
    }
    this.fail(`unterminated quote in the comment line: the " at column ${open + 1} (${what}) has no closing "`);
  }

  /** Text up to the closing character (for {…}), with backslash escapes. */
  private braced(close: string, what: string): string {
    const open = this.i;
    let out = '';
    let j = open + 1;
    while (j < this.n) {
      const ch = this.s[j];
      if (ch === '\\' && j + 1 < this.n) {
        out += this.s[j + 1];
        j += 2;
        continue;
      }
      if (ch === close) {
        this.i = j + 1;
        return out;
      }
      out += ch;
      j++;
    }
    this.fail(`unterminated ${this.s[open]} in the comment line: the one at column ${open + 1} (${what}) has no closing ${close}`);
  }

  private bare(stop: (ch: string) => boolean): string {
    const start = this.i;
    while (this.i < this.n && !this.isWs(this.s[this.i]) && !stop(this.s[this.i])) this.i++;
    return this.s.slice(start, this.i);
  }

  key(): { key: string; col: number } {
    const col = this.i + 1;
    if (this.s[this.i] === '"') return { key: this.quoted(`a quoted key`), col };
    if (this.s[this.i] === '=') this.fail(`comment line, column ${col}: expected a key before '=', found '='`);
    return { key: this.bare((ch) => ch === '='), col };
  }

  /** New-style [a, b, [c, d]] list: elements as (text, quoted) pairs, nested lists flattened by rows. */
  private list(what: string): { items: { text: string; quoted: boolean }[]; rows: number[] } {
    const open = this.i;
    this.i++;
    const items: { text: string; quoted: boolean }[] = [];
    const rows: number[] = [];
    let scalars = 0;
    this.skipWs();
    if (this.s[this.i] === ']') {
      this.i++;
      return { items, rows };
    }
    for (;;) {
      this.skipWs();
      if (this.i >= this.n) break;
      const ch = this.s[this.i];
      if (ch === '[') {
        const inner = this.list(what);
        if (inner.rows.length > 0) this.fail(`comment line, column ${open + 1}: arrays of more than two dimensions are not supported (${what})`);
        rows.push(inner.items.length);
        items.push(...inner.items);
      } else if (ch === '"') {
        items.push({ text: this.quoted(what), quoted: true });
        scalars++;
      } else {
        const text = this.bare((c) => c === ',' || c === ']' || c === '[');
        if (text === '') this.fail(`comment line, column ${this.i + 1}: expected an array element (${what}), found ${shown(this.s[this.i])}`);
        items.push({ text, quoted: false });
        scalars++;
      }
      this.skipWs();
      if (this.s[this.i] === ',') {
        this.i++;
        continue;
      }
      if (this.s[this.i] === ']') {
        this.i++;
        if (rows.length > 0 && rows.length * rows[0] !== items.length) {
          this.fail(`comment line, column ${open + 1}: expected a matrix with rows of equal length (${what}), found rows of ${[...new Set(rows)].join(', ')} elements`);
        }
        if (rows.length > 0 && scalars > 0) {
          this.fail(`comment line, column ${open + 1}: expected either single values or rows in the array, not both (${what})`);
        }
        return { items, rows };
      }
      if (this.i >= this.n) break;
      this.fail(`comment line, column ${this.i + 1}: expected ',' or ']' in the array (${what}), found ${shown(this.s[this.i])}`);
    }
    this.fail(`unterminated [ in the comment line: the one at column ${open + 1} (${what}) has no closing ]`);
  }

  value(key: string): Value {
    const col = this.i + 1;
    const what = `value of '${key}'`;
    const ch = this.s[this.i];
    if (ch === '"' || ch === '{') {
      const content = ch === '"' ? this.quoted(what) : this.braced('}', what);
      return { value: oldStyle(content, ch === '{'), raw: content, col };
    }
    if (ch === '[') {
      const start = this.i;
      const { items } = this.list(what);
      return { value: newStyle(items), raw: this.s.slice(start, this.i), col };
    }
    const text = this.bare(() => false);
    return { value: scalarOf(text), raw: text, col };
  }

  parse(): { pairs: { key: string; col: number; v: Value | null }[] } {
    const pairs: { key: string; col: number; v: Value | null }[] = [];
    for (;;) {
      this.skipWs();
      if (this.i >= this.n) break;
      const { key, col } = this.key();
      this.skipWs();
      if (this.s[this.i] === '=') {
        this.i++;
        this.skipWs();
        if (this.i >= this.n) this.fail(`comment line, column ${col}: key '${key}' is followed by '=' but no value`);
        pairs.push({ key, col, v: this.value(key) });
      } else {
        pairs.push({ key, col, v: null });
      }
    }
    return { pairs };
  }
}

/** Old-style array in quotes or braces: several numbers or logicals make an array, one makes a scalar. */
function oldStyle(content: string, braces: boolean): InfoValue {
  const tokens = content.split(/\s+/).filter((t) => t !== '');
  if (tokens.length === 0) return braces ? [] : '';
  const type = commonType(tokens);
  if (type === 'real') return tokens.length === 1 ? numberOf(tokens[0]) : tokens.map(numberOf);
  if (type === 'bool') return tokens.length === 1 ? boolOf(tokens[0]) : tokens.map(boolOf);
  if (braces) return tokens.length === 1 ? tokens[0] : tokens;
  return content;
}

/** New-style [..] array: always an array; any quoted element makes it an array of strings. */
function newStyle(items: { text: string; quoted: boolean }[]): InfoValue {
  if (items.some((it) => it.quoted)) return items.map((it) => it.text);
  const tokens = items.map((it) => it.text);
  const type = commonType(tokens);
  if (type === 'real') return tokens.map(numberOf);
  if (type === 'bool') return tokens.map(boolOf);
  return tokens;
}

/**
 * Parse a comment line. `where.line` is the frame's first line; the comment is on the next one.
 */
export function parseComment(text: string, where: Where): Comment {
  const lineNo = where.line + 1;
  const trimmed = text.replace(/[\r\n]+$/, '');
  if (!LOOKS_EXTENDED.test(trimmed)) {
    const info = new Map<string, InfoValue>();
    const c = trimmed.trim();
    if (c !== '') info.set('comment', c);
    return { extended: false, properties: null, lattice: null, pbc: null, info };
  }
  const parser: CommentParser = new CommentParser(trimmed, where.file, lineNo);
  const { pairs } = parser.parse();
  const info = new Map<string, InfoValue>();
  let properties: string | null = null;
  let lattice: Float64Array | null = null;
  let pbc: Pbc | null = null;
  const seen = new Set<string>();
  for (const { key, col, v } of pairs) {
    const lower = key.toLowerCase();
    const special = lower === 'properties' || lower === 'lattice' || lower === 'pbc';
    const id = special ? lower : key;
    if (seen.has(id)) parser.fail(`comment line, column ${col}: key '${key}' appears more than once`);
    seen.add(id);
    if (lower === 'properties') {
      if (v === null) parser.fail(`Properties: expected name:type:count triplets after 'Properties=', found no value`);
      properties = v.raw;
    } else if (lower === 'lattice') {
      lattice = latticeOf(v, parser);
    } else if (lower === 'pbc') {
      pbc = pbcOf(v, parser);
    } else {
      info.set(key, v === null ? true : v.value);
    }
  }
  return { extended: true, properties, lattice, pbc, info };
}

/** The value as written, with its element count when it is an array. */
function describe(v: Value): string {
  const x = v.value;
  if (Array.isArray(x)) return `${x.length} ${x.every((e) => typeof e === 'number') ? 'numbers' : 'values'} ${shown(v.raw)}`;
  return shown(v.raw);
}

function latticeOf(v: Value | null, parser: CommentParser): Float64Array {
  const found = v === null ? 'no value' : describe(v);
  if (v !== null && Array.isArray(v.value) && v.value.length === 9 && v.value.every((x) => typeof x === 'number')) {
    return Float64Array.from(v.value as number[]);
  }
  parser.fail(`Lattice: expected 9 numbers (ax ay az bx by bz cx cy cz), found ${found}`);
}

function pbcOf(v: Value | null, parser: CommentParser): Pbc {
  if (v !== null) {
    const x = v.value;
    if (typeof x === 'boolean') return [x, x, x];
    if (Array.isArray(x) && x.length === 3 && x.every((b) => typeof b === 'boolean')) return [x[0], x[1], x[2]] as Pbc;
  }
  parser.fail(`pbc: expected 3 logicals like "T T F", found ${v === null ? 'no value' : describe(v)}`);
}
