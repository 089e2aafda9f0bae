/**
 * Reading the exit record a batch script writes to <task dir>/exit.json, and the tail of a task's log.
 * A record that is absent, half-written or malformed reads as undefined (the task has not finished);
 * the script writes it atomically, so a partial file only comes from outside interference.
 */
import { readFileSync } from 'node:fs';
import { open, readFile } from 'node:fs/promises';
import { join } from 'node:path';
import type { ExitRecord } from './backend.js';

export const EXIT_RECORD_FILE = 'exit.json';
export const STDOUT_FILE = 'stdout.log';
export const STDERR_FILE = 'stderr.log';

/** Parse exit.json text; undefined unless it is a complete, well-formed record. */
export function parseExitRecord(text: string): ExitRecord | undefined {
  let v: unknown;
  try {
    v = JSON.parse(text);
  } catch {
    return undefined;
  }
  if (typeof v !== 'object' || v === null) return undefined;
  const r = v as Record<string, unknown>;
  const code = r.exit_code;
  if (typeof code !== 'number' || !Number.isInteger(code) || code < 0 || code > 255) return undefined;
  if (typeof r.start !== 'string' || Number.isNaN(Date.parse(r.start))) return undefined;
  if (typeof r.end !== 'string' || Number.isNaN(Date.parse(r.end))) return undefined;
  if (typeof r.host !== 'string') return undefined;
  return { exit_code: code, start: r.start, end: r.end, host: r.host };
}

/** The exit record of a task directory, or undefined when there is none yet (or it is unreadable as a record). */
export async function readExitRecord(dir: string): Promise<ExitRecord | undefined> {
  try {
    return parseExitRecord(await readFile(join(dir, EXIT_RECORD_FILE), 'utf8'));
  } catch (err) {
    if (isMissing(err)) return undefined;
    throw err;
  }
}

/** Synchronous readExitRecord, for hot reconcile loops. */
export function readExitRecordSync(dir: string): ExitRecord | undefined {
  try {
    return parseExitRecord(readFileSync(join(dir, EXIT_RECORD_FILE), 'utf8'));
  } catch (err) {
    if (isMissing(err)) return undefined;
    throw err;
  }
}

/** Duration of a finished task in seconds (for core-hour accounting), from its exit record. */
export function elapsedSeconds(r: ExitRecord): number {
  return Math.max(0, (Date.parse(r.end) - Date.parse(r.start)) / 1000);
}

/**
 * The last `lines` lines of a text file (reading at most `maxBytes` from its end), without a trailing
 * newline; '' when the file is absent.
 */
export async function tailLines(path: string, lines = 20, maxBytes = 8192): Promise<string> {
  let fh;
  try {
    fh = await open(path, 'r');
  } catch (err) {
    if (isMissing(err)) return '';
    throw err;
  }
  try {
    const { size } = await fh.stat();
    const length = Math.min(size, maxBytes);
    const buf = Buffer.alloc(length);
    await fh.read(buf, 0, length, size - length);
    let text = buf.toString('utf8');
    if (length < size) text = text.slice(text.indexOf('\n') + 1); // drop the partial first line
    const all = text.replace(/\n+$/, '').split('\n');
    return all.slice(-lines).join('\n');
  } finally {
    await fh.close();
  }
}

function isMissing(err: unknown): boolean {
  const code = (err as NodeJS.ErrnoException | undefined)?.code;
  return code === 'ENOENT' || code === 'ENOTDIR';
}
