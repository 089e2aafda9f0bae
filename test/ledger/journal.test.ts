/**
 * The ledger journal: JSON Lines (one JSON value per line, UTF-8, "\n"-terminated: the JSON Lines
 * convention, jsonlines.org; JSON itself per RFC 8259), append-only, seq from 1.
 * Durability rests on POSIX write(2) to an O_APPEND file plus fdatasync(2) before an append is
 * acknowledged (common practice for write-ahead logs).
 */
import { describe, expect, it, beforeEach } from 'vitest';
import { mkdtempSync, mkdirSync, readFileSync, writeFileSync, readdirSync, existsSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Journal, LedgerError, foldLedger, ledgerPath, readLedger } from '../../src/ledger/index.js';

let dir: string;
const quiet = { log: () => undefined, handleSignals: false };

beforeEach(() => {
  dir = mkdtempSync(join(tmpdir(), 'ratchet-journal-'));
});

function line(seq: number, extra: Record<string, unknown> = {}): string {
  return JSON.stringify({ seq, at: new Date(Date.UTC(2024, 0, 1, 0, 0, seq)).toISOString(), type: 'task', ...extra }) + '\n';
}

describe('Journal', () => {
  it('appends events with seq from 1, ISO times, one JSON object per line', async () => {
    const j = await Journal.open(dir, quiet);
    const a = await j.append({ type: 'round', round: 0 });
    const b = await j.append({ type: 'task', task: 'r0/sample/0000', state: 'queued', note: 'line\nbreak "quoted" ✓' });
    await j.close();
    expect(a.seq).toBe(1);
    expect(b.seq).toBe(2);
    // ISO 8601 in UTC as produced by Date.prototype.toISOString (ECMA-262, Date Time String Format).
    expect(a.at).toMatch(/^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}\.\d{3}Z$/);
    const text = readFileSync(ledgerPath(dir), 'utf8');
    const lines = text.split('\n');
    expect(lines.length).toBe(3); // two lines and the final newline
    expect(lines[2]).toBe('');
    expect(JSON.parse(lines[1])).toEqual(b);
    expect(JSON.parse(lines[1]).note).toBe('line\nbreak "quoted" ✓');
    const r = await readLedger(dir);
    expect(r.events).toEqual([a, b]);
    expect(r.torn).toBeUndefined();
  });

  it('keeps call order for concurrent appends and continues seq after reopening', async () => {
    const j = await Journal.open(dir, quiet);
    const got = await Promise.all(Array.from({ length: 50 }, (_, i) => j.append({ type: 'n', i })));
    expect(got.map((e) => e.seq)).toEqual(Array.from({ length: 50 }, (_, i) => i + 1));
    const many = await j.appendMany([{ type: 'x' }, { type: 'y' }]);
    expect(many.map((e) => e.seq)).toEqual([51, 52]);
    await j.close();
    const j2 = await Journal.open(dir, quiet);
    expect(j2.lastSeq).toBe(52);
    expect(j2.history.length).toBe(52);
    expect((await j2.append({ type: 'z' })).seq).toBe(53);
    await j2.close();
    const r = await readLedger(dir);
    expect(r.events.map((e) => (e as { i?: number }).i).slice(0, 50)).toEqual(Array.from({ length: 50 }, (_, i) => i));
  });

  it('does not let the caller set seq or at, and refuses events without a type', async () => {
    const j = await Journal.open(dir, quiet);
    const e = await j.append({ type: 't', seq: 99, at: 'yesterday' } as never);
    expect(e.seq).toBe(1);
    expect(e.at).not.toBe('yesterday');
    await expect(j.append({} as never)).rejects.toThrow(/non-empty string "type"/);
    await expect(j.append({ type: 'ok' })).resolves.toMatchObject({ seq: 2 });
    await j.close();
    await expect(j.append({ type: 'late' })).rejects.toThrow(/closed/);
  });

  it('reads a missing ledger as empty', async () => {
    expect(await readLedger(dir)).toEqual({ events: [] });
  });

  it('folds events in a stream, across small chunks and multi-byte characters', async () => {
    const j = await Journal.open(dir, quiet);
    for (let i = 0; i < 200; i++) await j.append({ type: i % 3 ? 'task' : 'artifact', text: 'Å→ε'.repeat(i % 7) });
    await j.close();
    // 7-byte chunks split lines and UTF-8 sequences at arbitrary points.
    const r = await foldLedger(dir, (n: Record<string, number>, e) => ((n[e.type] = (n[e.type] ?? 0) + 1), n), {}, { chunkBytes: 7 });
    expect(r.count).toBe(200);
    expect(r.state).toEqual({ task: 133, artifact: 67 });
    const all = await readLedger(dir);
    expect(all.events[13].text).toBe('Å→ε'.repeat(6));
  });
});

describe('torn and malformed ledgers', () => {
  it('skips and reports a torn last line, then saves it aside and cuts it off on open', async () => {
    mkdirRatchet();
    const torn = '{"seq":3,"at":"2024-01-01T00:00:03.000Z","type":"artifact","id":"sha256:ab';
    writeFileSync(ledgerPath(dir), line(1) + line(2) + torn);
    const r = await readLedger(dir);
    expect(r.events.map((e) => e.seq)).toEqual([1, 2]);
    expect(r.torn).toMatchObject({ line: 3, text: torn, bytes: Buffer.byteLength(torn) });

    const messages: string[] = [];
    const j = await Journal.open(dir, { log: (m) => messages.push(m), handleSignals: false });
    expect(messages.join('\n')).toMatch(/ledger\.jsonl:3: the last line was cut short/);
    expect(j.repaired?.torn.line).toBe(3);
    // Nothing lost: the torn bytes are kept verbatim beside the ledger.
    expect(readFileSync(j.repaired!.savedTo, 'utf8')).toBe(torn);
    expect(readdirSync(join(dir, '.ratchet')).some((f) => /^torn-.*\.jsonl$/.test(f))).toBe(true);
    const e = await j.append({ type: 'after' });
    await j.close();
    expect(e.seq).toBe(3);
    expect(readFileSync(ledgerPath(dir), 'utf8')).toBe(line(1) + line(2) + JSON.stringify(e) + '\n');
    const again = await readLedger(dir);
    expect(again.torn).toBeUndefined();
    expect(again.events.length).toBe(3);
  });

  it('treats a complete-looking last line without its newline as torn (its append never returned)', async () => {
    mkdirRatchet();
    writeFileSync(ledgerPath(dir), line(1) + line(2).trimEnd());
    const r = await readLedger(dir);
    expect(r.events.length).toBe(1);
    expect(r.torn?.line).toBe(2);
  });

  it('treats NUL bytes left at the end by a crash as a torn tail', async () => {
    mkdirRatchet();
    writeFileSync(ledgerPath(dir), Buffer.concat([Buffer.from(line(1)), Buffer.alloc(40)]));
    const r = await readLedger(dir);
    expect(r.events.length).toBe(1);
    expect(r.torn).toMatchObject({ line: 2, bytes: 40 });
  });

  it('refuses a malformed line in the middle, naming file and line', async () => {
    mkdirRatchet();
    writeFileSync(ledgerPath(dir), line(1) + '{"seq":2,"at":"x","type":"ta\n' + line(3));
    const err = await readLedger(dir).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(LedgerError);
    expect((err as LedgerError).line).toBe(2);
    expect((err as Error).message).toMatch(/ledger\.jsonl:2: malformed ledger line/);
    // The journal refuses to open it too, and changes nothing.
    const before = readFileSync(ledgerPath(dir));
    await expect(Journal.open(dir, quiet)).rejects.toThrow(/ledger\.jsonl:2:/);
    expect(readFileSync(ledgerPath(dir))).toEqual(before);
    expect(existsSync(join(dir, '.ratchet', 'lock'))).toBe(false);
  });

  it('refuses lines that are not events or whose seq goes backwards', async () => {
    mkdirRatchet();
    writeFileSync(ledgerPath(dir), line(1) + '[1,2]\n');
    await expect(readLedger(dir)).rejects.toThrow(/:2: expected a JSON object/);
    writeFileSync(ledgerPath(dir), line(1) + '{"seq":2,"type":"t"}\n');
    await expect(readLedger(dir)).rejects.toThrow(/:2: expected an event with numeric "seq", string "at"/);
    writeFileSync(ledgerPath(dir), line(1) + line(2) + line(2));
    await expect(readLedger(dir)).rejects.toThrow(/:3: seq 2 does not follow seq 2/);
  });

  it('a torn line followed by more lines (an edit, not a crash) is an error naming it', async () => {
    mkdirRatchet();
    writeFileSync(ledgerPath(dir), line(1) + '{"seq":2,"at"' + line(3));
    await expect(readLedger(dir)).rejects.toThrow(/ledger\.jsonl:2:/);
  });
});

function mkdirRatchet(): void {
  mkdirSync(join(dir, '.ratchet'), { recursive: true });
}
