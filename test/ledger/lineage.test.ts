/**
 * Lineage over a hand-built ledger with a realistic campaign shape (fixtures/campaign-log.ts, invented
 * data). Expected ancestor sets are written out by hand from the campaign's story, not computed.
 */
import { describe, expect, it } from 'vitest';
import {
  downstream,
  frameUpstream,
  lineageGraph,
  resolveArtifact,
  roots,
  upstream,
  type LedgerEvent,
  type LineageNode,
} from '../../src/ledger/index.js';
import { CAMPAIGN_SHA, campaignLog, fakeId } from './fixtures/campaign-log.js';

function recordedIds(n: LineageNode, out = new Set<string>()): Set<string> {
  if (n.status === 'recorded') out.add(n.id);
  n.children.forEach((c) => recordedIds(c, out));
  return out;
}

function count(n: LineageNode, pred: (n: LineageNode) => boolean): number {
  return (pred(n) ? 1 : 0) + n.children.reduce((s, c) => s + count(c, pred), 0);
}

describe('upstream', () => {
  const { events, ids } = campaignLog(3);

  it('walks from the round-1 trajectory back to the starting structures', () => {
    const t = upstream(events, 'rounds/1/simulate/300K/trajectory.xyz')!;
    expect(t.id).toBe(ids['r1.traj']);
    expect(t.role).toBe('trajectory');
    expect(t.task).toMatchObject({
      id: 'r1/simulate/300K',
      command: 'python md.py --T 300',
      campaign_sha256: CAMPAIGN_SHA,
      tool_version: '0.1.0',
      state: 'succeeded',
    });
    // The committee that drove it, then the start structures.
    expect(t.children.map((c) => [c.role, c.path, c.relation])).toEqual([
      ['model', 'rounds/1/train/0000/model', 'input'],
      ['model', 'rounds/1/train/0001/model', 'input'],
      ['model', 'rounds/1/train/0002/model', 'input'],
      ['start', 'structures/start.xyz', 'input'],
    ]);
    // Every artifact of both rounds is an ancestor: hand-listed.
    const expected = [
      'start', 'r0.sampled', 'r0.labeled.0000', 'r0.labeled.0001', 'r0.train', 'r0.model.0000', 'r0.model.0001',
      'r0.model.0002', 'r0.traj', 'r1.selected', 'r1.labeled.0000', 'r1.train', 'r1.model.0000', 'r1.model.0001',
      'r1.model.0002', 'r1.traj',
    ].map((k) => ids[k]);
    expect([...recordedIds(t)].sort()).toEqual([...expected].sort());
    expect(roots(t).map((r) => r.path)).toEqual(['structures/start.xyz']);
    expect(count(t, (n) => n.status === 'not_recorded')).toBe(0);
  });

  it('shows a shared ancestor once in full and then as a reference', () => {
    const t = upstream(events, ids['r1.traj'])!;
    // The r1 training set sits under each of the three r1 models: expanded under the first only.
    const m = t.children.slice(0, 3).map((c) => c.children[0]);
    expect(m.map((n) => n.id)).toEqual([ids['r1.train'], ids['r1.train'], ids['r1.train']]);
    expect(m.map((n) => n.ref)).toEqual([undefined, 'repeat', 'repeat']);
    expect(m[0].children.length).toBe(3);
    expect(m[1].children.length).toBe(0);
    // The tree is linear in the graph: each recorded artifact is expanded exactly once.
    expect(count(t, (n) => n.status === 'recorded' && !n.ref)).toBe(recordedIds(t).size);
  });

  it('reaches the frame source of a frame selection', () => {
    const t = upstream(events, ids['r1.selected'])!;
    expect(t.children.map((c) => [c.id, c.relation])).toEqual([[ids['r0.traj'], 'input']]);
    // frame_sources given only by the caller (e.g. read from the file): marked as such.
    const only = events.map((e) => (e.id === ids['r1.selected'] ? { ...e, inputs: [], frame_sources: undefined } : e));
    const t2 = upstream(only, ids['r1.selected'], { frameSources: new Map([[ids['r1.selected'], [ids['r0.traj']]]]) })!;
    expect(t2.children.map((c) => [c.id, c.relation])).toEqual([[ids['r0.traj'], 'frame_source']]);
    expect(roots(t2).map((r) => r.path)).toEqual(['structures/start.xyz']);
  });

  it('reports an input that was never registered as not recorded, without failing', () => {
    const ghost = fakeId('never registered');
    const ev = events.map((e) => (e.id === ids['r0.sampled'] ? { ...e, inputs: [ghost, ...(e.inputs as string[])] } : e));
    const t = upstream(ev, ids['r0.traj'])!;
    const missing: LineageNode[] = [];
    const walk = (n: LineageNode): void => {
      if (n.status === 'not_recorded') missing.push(n);
      n.children.forEach(walk);
    };
    walk(t);
    expect(missing.map((n) => n.id)).toEqual([ghost]);
    expect(missing[0].children).toEqual([]);
  });

  it('survives a cycle in a hand-edited ledger', () => {
    const a = fakeId('a');
    const b = fakeId('b');
    const base = { at: '2024-01-01T00:00:00.000Z', type: 'artifact', campaign_sha256: 'c', tool_version: '0', role: 'x' };
    const ev: LedgerEvent[] = [
      { seq: 1, ...base, id: a, path: 'a', inputs: [b] },
      { seq: 2, ...base, id: b, path: 'b', inputs: [a] },
    ];
    const t = upstream(ev, 'a')!;
    expect(t.children[0].id).toBe(b);
    expect(t.children[0].children[0]).toMatchObject({ id: a, ref: 'cycle', children: [] });
    const d = downstream(ev, 'a')!;
    expect(d.children[0].children[0].ref).toBe('cycle');
  });

  it('stops at a depth limit and says so', () => {
    const t = upstream(events, ids['r1.traj'], { maxDepth: 1 })!;
    expect(t.children.length).toBe(4);
    expect(t.children[0].truncated).toBe(true);
    expect(t.children[0].children).toEqual([]);
    expect(t.children[3].truncated).toBeUndefined(); // the start structures have nothing upstream
  });

  it('handles a chain of 20,000 artifacts without running out of stack', () => {
    const ev: LedgerEvent[] = [];
    for (let i = 0; i < 20_000; i++) {
      ev.push({ seq: i + 1, at: '2024-01-01T00:00:00.000Z', type: 'artifact', id: fakeId(`c${i}`), path: `c${i}`, role: 'x', inputs: i ? [fakeId(`c${i - 1}`)] : [], campaign_sha256: 'c', tool_version: '0' });
    }
    let n: LineageNode | undefined = upstream(ev, 'c19999');
    let depth = 0;
    while (n && n.children.length) {
      n = n.children[0];
      depth++;
    }
    expect(depth).toBe(19_999);
    expect(n!.path).toBe('c0');
  });

  it('returns undefined for an unknown id or path', () => {
    expect(upstream(events, fakeId('nope'))).toBeUndefined();
    expect(upstream(events, 'rounds/9/x.xyz')).toBeUndefined();
  });
});

describe('downstream', () => {
  const { events, ids } = campaignLog(2);

  it('finds everything made from the r0 label chunk, through both rounds', () => {
    const t = downstream(events, ids['r0.labeled.0001'])!;
    const expected = ['r0.labeled.0001', 'r0.train', 'r0.model.0000', 'r0.model.0001', 'r0.traj', 'r1.selected', 'r1.labeled.0000', 'r1.train', 'r1.model.0000', 'r1.model.0001', 'r1.traj'].map((k) => ids[k]);
    expect([...recordedIds(t)].sort()).toEqual([...expected].sort());
    // Direct products: both training sets (r0, and r1 which gathers all labels so far).
    expect(t.children.map((c) => c.path)).toEqual(['rounds/0/train/training_set.xyz', 'rounds/1/train/training_set.xyz']);
    expect(t.children.every((c) => c.relation === 'product')).toBe(true);
  });

  it('follows frame_sources downstream even when they are not listed as inputs', () => {
    const ev = events.map((e) => (e.id === ids['r1.selected'] ? { ...e, inputs: [] } : e));
    const t = downstream(ev, ids['r0.traj'])!;
    expect(t.children.map((c) => c.id)).toEqual([ids['r1.selected']]);
  });

  it('from the start structures reaches the last trajectory', () => {
    const t = downstream(events, 'structures/start.xyz')!;
    expect(recordedIds(t).has(ids['r1.traj'])).toBe(true);
  });
});

describe('resolution and frames', () => {
  const { events, ids } = campaignLog(2);

  it('resolves a path to its latest registration and an id to its first', () => {
    const later = { ...events[events.length - 2], seq: 1000, id: fakeId('rewritten'), task: 'r1/simulate/300K' };
    const g = lineageGraph([...events, later]);
    expect(resolveArtifact(g, 'rounds/1/simulate/300K/trajectory.xyz')!.id).toBe(fakeId('rewritten'));
    expect(resolveArtifact(g, './rounds/1/simulate/300K/trajectory.xyz')!.id).toBe(fakeId('rewritten'));
    expect(resolveArtifact(g, ids['r1.traj'])!.seq).toBeLessThan(1000);
  });

  it('follows one frame back through a selection to the trajectory frame it came from', async () => {
    // What the files would say: frame 2 of the selection is frame 57 of the r0 trajectory, which is an original.
    const reads: string[] = [];
    const trace = await frameUpstream(events, ids['r1.selected'], 2, async (a, f) => {
      reads.push(`${a.path}#${f}`);
      return a.id === ids['r1.selected'] ? { source_artifact: ids['r0.traj'], source_frame: 57 } : null;
    });
    expect(trace.end).toBe('origin');
    expect(trace.steps.map((s) => [s.path, s.frame, s.task])).toEqual([
      ['rounds/1/sample/0000/selected.xyz', 2, 'r1/sample/0000'],
      ['rounds/0/simulate/300K/trajectory.xyz', 57, 'r0/simulate/300K'],
    ]);
    expect(reads).toEqual(['rounds/1/sample/0000/selected.xyz#2', 'rounds/0/simulate/300K/trajectory.xyz#57']);
  });

  it('stops a frame trace at an unrecorded source, a cycle, or an unreadable file', async () => {
    const ghost = fakeId('ghost');
    const t1 = await frameUpstream(events, ids['r1.selected'], 0, async () => ({ source_artifact: ghost, source_frame: 3 }));
    expect(t1.end).toBe('not_recorded');
    expect(t1.steps[1]).toEqual({ artifact: ghost, frame: 3, status: 'not_recorded' });
    const t2 = await frameUpstream(events, ids['r1.selected'], 0, async (a, f) => ({ source_artifact: a.id, source_frame: f }));
    expect(t2.end).toBe('cycle');
    const t3 = await frameUpstream(events, ids['r1.selected'], 0, async () => {
      throw new Error('disk gone');
    });
    expect(t3).toMatchObject({ end: 'unreadable', message: 'disk gone' });
  });
});
