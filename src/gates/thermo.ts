/**
 * Thermo tables: the per-step output an MD code writes beside a trajectory (time, energies, temperature...),
 * as CSV or whitespace-separated columns under a header row that names them.
 *
 * Layout accepted:
 *  - blank lines are skipped anywhere;
 *  - the header is the last non-blank line before the first data row, with a leading '#' removed
 *    (so "# step time etot" works, and so do comment lines above the header);
 *  - a data row is a line whose fields are all numbers; nan and inf (any case, signed) are read as non-finite numbers;
 *  - comma-separated when the header holds a comma, otherwise split on runs of spaces or tabs;
 *  - '#' lines after the header are comments; `.gz` files are decompressed.
 */
import { createReadStream } from 'node:fs';
import { createGunzip } from 'node:zlib';
import { createInterface } from 'node:readline';
import type { Readable } from 'node:stream';

export class ThermoError extends Error {
  constructor(
    readonly file: string,
    readonly line: number | undefined,
    what: string,
  ) {
    super(line === undefined ? `${file}: ${what}` : `${file}:${line}: ${what}`);
    this.name = 'ThermoError';
  }
}

export interface ThermoTable {
  path: string;
  /** Column names as written in the header. */
  header: string[];
  /** 1-based line number of the header. */
  headerLine: number;
  /** One array per header column, one entry per data row. */
  values: Float64Array[];
  /** 1-based line number of each data row. */
  lines: Int32Array;
}

/** Parse one field as a number the way Number() does, plus nan/inf spellings; undefined if not a number. */
export function parseField(text: string): number | undefined {
  const t = text.trim();
  if (t === '') return undefined;
  const x = Number(t);
  if (!Number.isNaN(x)) return x;
  const low = t.toLowerCase();
  if (low === 'nan' || low === '+nan' || low === '-nan') return NaN;
  if (low === 'inf' || low === '+inf' || low === 'infinity' || low === '+infinity') return Infinity;
  if (low === '-inf' || low === '-infinity') return -Infinity;
  return undefined;
}

function splitFields(line: string, csv: boolean): string[] {
  if (csv) return line.split(',').map((f) => f.trim().replace(/^"(.*)"$/, '$1'));
  const t = line.trim();
  return t === '' ? [] : t.split(/\s+/);
}

function allNumbers(fields: string[]): boolean {
  return fields.length > 0 && fields.every((f) => parseField(f) !== undefined);
}

/** Parse a whole table from lines (the streaming reader and the tests share this). */
export class ThermoParser {
  private header: string[] | undefined;
  private headerLine = 0;
  private csv = false;
  private lastText: { text: string; line: number } | undefined;
  private cols: number[][] = [];
  private rowLines: number[] = [];

  constructor(readonly path: string) {}

  push(raw: string, lineNo: number): void {
    const line = raw.replace(/\r$/, '');
    if (line.trim() === '') return;
    if (this.header === undefined) {
      const body = line.trim();
      const probeCsv = body.includes(',');
      const fields = splitFields(body, probeCsv);
      if (!body.startsWith('#') && allNumbers(fields)) {
        if (!this.lastText)
          throw new ThermoError(this.path, lineNo, 'expected a header row naming the columns before the first row of numbers');
        this.setHeader(this.lastText.text, this.lastText.line);
      } else {
        this.lastText = { text: body, line: lineNo };
        return;
      }
    } else if (line.trim().startsWith('#')) {
      return;
    }
    const fields = splitFields(line, this.csv);
    const header = this.header!;
    if (fields.length !== header.length)
      throw new ThermoError(
        this.path,
        lineNo,
        `expected ${header.length} fields (as named in the header on line ${this.headerLine}), found ${fields.length}`,
      );
    for (let c = 0; c < fields.length; c++) {
      const x = parseField(fields[c]);
      if (x === undefined)
        throw new ThermoError(this.path, lineNo, `expected a number in column '${header[c]}', found '${fields[c]}'`);
      this.cols[c].push(x);
    }
    this.rowLines.push(lineNo);
  }

  private setHeader(text: string, line: number): void {
    const body = text.replace(/^#+\s*/, '');
    this.csv = body.includes(',');
    const names = splitFields(body, this.csv);
    if (names.length === 0 || names.some((n) => n === ''))
      throw new ThermoError(this.path, line, 'expected a header row of column names, found an empty name');
    this.header = names;
    this.headerLine = line;
    this.cols = names.map(() => []);
  }

  finish(): ThermoTable {
    if (this.header === undefined)
      throw new ThermoError(
        this.path,
        undefined,
        this.lastText ? 'expected rows of numbers under the header, found none' : 'expected a header row and rows of numbers, found an empty file',
      );
    return {
      path: this.path,
      header: this.header,
      headerLine: this.headerLine,
      values: this.cols.map((c) => Float64Array.from(c)),
      lines: Int32Array.from(this.rowLines),
    };
  }
}

/** Read a thermo table from a file (streamed line by line; `.gz` decompressed). */
export async function readThermoTable(path: string): Promise<ThermoTable> {
  const parser = new ThermoParser(path);
  let input: Readable = createReadStream(path);
  const opened = new Promise<void>((resolve, reject) => {
    input.once('open', () => resolve());
    input.once('error', reject);
  });
  try {
    await opened;
  } catch (err) {
    throw new ThermoError(path, undefined, `cannot read the file (${(err as NodeJS.ErrnoException).code ?? (err as Error).message})`);
  }
  if (path.endsWith('.gz')) {
    const gunzip = createGunzip();
    input.once('error', (e) => gunzip.destroy(e));
    input = input.pipe(gunzip);
  }
  const rl = createInterface({ input, crlfDelay: Infinity });
  let n = 0;
  try {
    for await (const line of rl) parser.push(line, ++n);
  } catch (err) {
    if (err instanceof ThermoError) throw err;
    throw new ThermoError(path, n + 1, `cannot read the file (${(err as Error).message})`);
  } finally {
    rl.close();
    input.destroy();
  }
  return parser.finish();
}

/** Normalised column name: lower case, a trailing unit in [] or () removed ("Time[fs]" -> "time"). */
export function normaliseName(name: string): string {
  return name
    .trim()
    .toLowerCase()
    .replace(/\s*[[(][^\])]*[\])]\s*$/, '');
}

/**
 * Index of the column called `name` (exact first, then ignoring case and a unit suffix), or of the first of
 * `candidates` present. -1 when none matches.
 */
export function findColumn(header: string[], name: string | undefined, candidates: string[] = []): number {
  if (name !== undefined) {
    const exact = header.indexOf(name);
    if (exact >= 0) return exact;
    const n = normaliseName(name);
    return header.findIndex((h) => h.toLowerCase() === name.toLowerCase() || normaliseName(h) === n);
  }
  for (const c of candidates) {
    const k = header.findIndex((h) => normaliseName(h) === c);
    if (k >= 0) return k;
  }
  return -1;
}
