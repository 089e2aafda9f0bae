/** The text tree of `ratchet lineage`: layout of every kind of node (format is ours: common practice box-drawing tree). */
import { describe, expect, it } from 'vitest';
import { renderTree, renderFrameTrace } from '../../src/ledger/query.js';
import type { LineageNode } from '../../src/ledger/index.js';

const id = (c: string): string => 'sha256:' + c.repeat(64);

describe('renderTree', () => {
  it('draws roles, short ids, paths, tasks and the special nodes', () => {
    const tree: LineageNode = {
      id: id('a'),
      status: 'recorded',
      role: 'model',
      path: 'rounds/0/train/0000/model',
      task: { id: 'r0/train/0000', command: 'fit --seed 0\n--fast', campaign_sha256: 'f'.repeat(64), tool_version: '0.1.0', state: 'succeeded', events: 2 },
      also: [{ path: 'copy/model', seq: 9 }],
      children: [
        { id: id('b'), status: 'not_recorded', relation: 'input', children: [] },
        { id: id('c'), status: 'recorded', relation: 'input', role: 'start', path: 'start.xyz', children: [] },
        { id: id('a'), status: 'recorded', relation: 'input', role: 'model', path: 'rounds/0/train/0000/model', ref: 'cycle', children: [] },
        { id: id('d'), status: 'recorded', relation: 'frame_source', role: 'trajectory', path: 't.xyz', truncated: true, children: [] },
      ],
    };
    expect(renderTree(tree)).toBe(
      [
        'model  aaaaaaaaaaaa  rounds/0/train/0000/model',
        '│ task r0/train/0000: fit --seed 0 ⏎ --fast  (campaign ffffffffffff, ratchet 0.1.0, succeeded)',
        '│ same content also registered at copy/model',
        '├── ? bbbbbbbbbbbb  not recorded in the ledger',
        '├── start  cccccccccccc  start.xyz',
        '│     given to the campaign (no producing task)',
        '├── model  aaaaaaaaaaaa  rounds/0/train/0000/model  (cycle: leads back to itself)',
        '└── trajectory (frames from)  dddddddddddd  t.xyz',
        '      ... (depth limit)',
        '',
      ].join('\n'),
    );
  });

  it('draws a frame trace', () => {
    const text = renderFrameTrace({
      steps: [
        { artifact: id('e'), frame: 2, path: 'sel.xyz', role: 'selected', task: 'r1/sample/0000', status: 'recorded' },
        { artifact: id('f'), frame: 40, status: 'not_recorded' },
      ],
      end: 'not_recorded',
    });
    expect(text).toBe(
      'frame 2 of selected eeeeeeeeeeee sel.xyz (task r1/sample/0000)\n' +
        '  <- frame 40 of ffffffffffff (not recorded in the ledger)\n' +
        '    (its source artifact is not recorded in the ledger)\n',
    );
  });
});
