/**
 * Crash safety: a writer process appends events and prints "ack <seq>" only after append() resolved
 * (i.e. after fdatasync(2) returned: POSIX says the data is then on the storage device). It is killed
 * with SIGKILL mid-stream several times. Every acknowledged event must be in the ledger; at most the
 * last line may be torn; the next open repairs the tail, takes over the dead writer's lock and
 * continues the sequence without gaps.
 */
import { describe, expect, it } from 'vitest';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Journal, readLedger } from '../../src/ledger/index.js';
import { startWriter } from './fixtures/child.js';

describe('SIGKILL during appends', () => {
  it('loses no acknowledged event and leaves at most a torn last line, across repeated kills', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'ratchet-crash-'));
    let acked = 0;
    // Varying payload sizes (small, 64 KiB, 300 KiB lines) and kill points.
    const runs: Array<[number, number]> = [
      [100, 5],
      [65_536, 3],
      [300_000, 2],
      [100, 40],
      [20_000, 17],
    ];
    for (const [payload, killAfter] of runs) {
      const c = startWriter('append', dir, String(payload));
      const target = acked + killAfter;
      await c.waitFor((l) => l.startsWith('ack ') && Number(l.slice(4)) >= target);
      c.proc.kill('SIGKILL');
      const { signal } = await c.exited;
      expect(signal).toBe('SIGKILL');
      const acks = c.lines.filter((l) => l.startsWith('ack ')).map((l) => Number(l.slice(4)));
      const maxAck = Math.max(...acks);

      const r = await readLedger(dir);
      const seqs = r.events.map((e) => e.seq);
      // No gap, starts at 1, and every acknowledged seq is present.
      expect(seqs).toEqual(Array.from({ length: seqs.length }, (_, i) => i + 1));
      expect(seqs.length).toBeGreaterThanOrEqual(maxAck);
      // At most one more event than acknowledged could be complete (written, not yet acknowledged).
      expect(seqs.length).toBeLessThanOrEqual(maxAck + 1);
      acked = seqs.length;
      // The next open repairs any torn tail and takes the dead writer's lock.
      const j = await Journal.open(dir, { log: () => undefined, handleSignals: false });
      expect(j.lastSeq).toBe(acked);
      await j.close();
    }
    const final = await readLedger(dir);
    expect(final.torn).toBeUndefined();
    expect(final.events.length).toBe(acked);
  });
});
