/**
 * The programs a task ran, as lineage reports them: taken from the task's latest submission (each
 * attempt records what it ran), shown per task in the tree and in the text rendering. Pure: events in,
 * tree out (the hashes here are invented).
 */
import { describe, expect, it } from 'vitest';
import { lineageGraph, upstream } from '../../src/ledger/lineage.js';
import { renderTree } from '../../src/ledger/query.js';
import type { LedgerEvent } from '../../src/ledger/journal.js';

const hex = (c: string) => c.repeat(64);
let seq = 0;
const ev = (e: Record<string, unknown>): LedgerEvent => ({ seq: ++seq, at: '2026-01-01T00:00:00Z', type: String(e.type), ...e });
const art = (id: string, path: string, role: string, task?: string, inputs: string[] = []) =>
  ev({ type: 'artifact', id: `sha256:${id}`, path, role, ...(task ? { task } : {}), inputs: inputs.map((i) => `sha256:${i}`), campaign_sha256: 'c', tool_version: '0', kind: 'file', bytes: 1 });

describe('programs in lineage', () => {
  it('shows the programs of the attempt that made each artifact', () => {
    const events = [
      art(hex('a'), 'start.xyz', 'start'),
      ev({ type: 'task_submitted', task: 'r0/label/0000', attempt: 1, job_id: '1', backend: 'local', programs: { 'label.py': `sha256:${hex('1')}` } }),
      ev({ type: 'task_ended', task: 'r0/label/0000', attempt: 1, state: 'failed' }),
      // The program was fixed before the second attempt: the second attempt's hash counts.
      ev({ type: 'task_submitted', task: 'r0/label/0000', attempt: 2, job_id: '2', backend: 'local', programs: { 'label.py': `sha256:${hex('2')}`, basis: `sha256:${hex('3')}` } }),
      ev({ type: 'task_ended', task: 'r0/label/0000', attempt: 2, state: 'succeeded' }),
      art(hex('b'), 'rounds/r0/label/0000/labeled.xyz', 'labeled', 'r0/label/0000', [hex('a')]),
      // A task whose stage lists no programs has none.
      ev({ type: 'task_submitted', task: 'r0/train/0000', attempt: 1, job_id: '3', backend: 'local' }),
      art(hex('c'), 'rounds/r0/train/0000/model', 'model', 'r0/train/0000', [hex('b')]),
    ];
    const tree = upstream(lineageGraph(events), 'rounds/r0/train/0000/model')!;
    expect(tree.task!.programs).toBeUndefined();
    const labeled = tree.children[0];
    expect(labeled.task!.programs).toEqual({ 'label.py': `sha256:${hex('2')}`, basis: `sha256:${hex('3')}` });
    const text = renderTree(tree);
    expect(text).toContain(`programs: label.py ${hex('2').slice(0, 12)}, basis ${hex('3').slice(0, 12)}`);
    expect(text).not.toContain(hex('1').slice(0, 12));
    expect(text.match(/programs:/g)).toHaveLength(1);
  });

  it('forgets programs when a later attempt ran without any listed', () => {
    const events = [
      ev({ type: 'task_submitted', task: 'r0/label/0001', attempt: 1, job_id: '1', backend: 'local', programs: { 'label.py': `sha256:${hex('4')}` } }),
      ev({ type: 'task_submitted', task: 'r0/label/0001', attempt: 2, job_id: '2', backend: 'local' }),
      art(hex('d'), 'rounds/r0/label/0001/labeled.xyz', 'labeled', 'r0/label/0001'),
    ];
    expect(upstream(lineageGraph(events), `sha256:${hex('d')}`)!.task!.programs).toBeUndefined();
  });
});
