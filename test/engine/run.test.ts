/**
 * A whole campaign through the engine (library calls, local backend, invented stage programs):
 * every stage transition of two rounds, convergence, the ledger's records, lineage from the last
 * trajectory back to the starting structures, and the files handed on being readable by ASE.
 */
import { execFileSync } from 'node:child_process';
import { existsSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { upstream, roots } from '../../src/ledger/lineage.js';
import { runCampaign } from '../../src/engine/run.js';
import { BufferOutput } from '../../src/engine/output.js';
import { campaignStatus, formatStatus } from '../../src/engine/status.js';
import { STAGES } from '../../src/engine/ids.js';
import { ledgerEvents, makeCampaign, removeCampaigns } from './fixture.js';

afterAll(removeCampaigns);

describe('a campaign from start to convergence', () => {
  const { dir, file } = makeCampaign();
  const out = new BufferOutput();
  let exitCode = -1;
  let events: Record<string, any>[] = [];

  beforeAll(async () => {
    const r = await runCampaign({ campaign: file, out, error: (m) => out.line(`error: ${m}`) });
    exitCode = r.exitCode;
    events = ledgerEvents(dir);
  }, 240_000);

  it('runs every stage of two rounds in order and converges', () => {
    expect(out.text).toContain('campaign converged in round 1');
    expect(exitCode).toBe(0);
    const planned = events.filter((e) => e.type === 'stage_planned').map((e) => `r${e.round}/${e.stage}`);
    const gated = events.filter((e) => e.type === 'stage_gated').map((e) => `r${e.round}/${e.stage}`);
    const order = [0, 1].flatMap((r) => STAGES.map((s) => `r${r}/${s}`));
    expect(planned).toEqual(order);
    expect(gated).toEqual(order);
    // Each stage is judged after its last task ended and before the next stage is planned.
    for (const sid of order) {
      const g = events.findIndex((e) => e.type === 'stage_gated' && `r${e.round}/${e.stage}` === sid);
      const lastEnd = events.map((e, i) => (e.type === 'task_ended' && e.task.startsWith(`${sid}/`) ? i : -1)).reduce((a, b) => Math.max(a, b));
      expect(lastEnd).toBeLessThan(g);
    }
    const end = events.find((e) => e.type === 'campaign_ended');
    expect(end).toMatchObject({ state: 'converged', round: 1 });
    // A new ledger starts by naming its campaign file (one state per campaign file), then the run.
    expect(events[0]).toMatchObject({ type: 'campaign_identity', name: 'engine test', file: 'campaign.yaml' });
    // then the campaign file's first revision (src/engine/revisions.ts), then the run.
    expect(events[1]).toMatchObject({ type: 'campaign_revision', number: 1, changes: [] });
    expect(events[2].type).toBe('run_started');
    expect(events.at(-1)).toMatchObject({ type: 'run_ended', outcome: 'finished', exit_code: 0 });
  });

  it('records every task once, started before it ended, each finished task run once', () => {
    const submitted = events.filter((e) => e.type === 'task_submitted');
    const ended = events.filter((e) => e.type === 'task_ended');
    expect(new Set(submitted.map((e) => e.task)).size).toBe(submitted.length);
    expect(ended.every((e) => e.state === 'succeeded' && e.attempt === 1)).toBe(true);
    for (const e of ended) {
      const s = events.findIndex((x) => x.type === 'task_submitted' && x.task === e.task);
      expect(s).toBeLessThan(events.indexOf(e));
      if (e.task.includes('/sample/')) continue; // built in: no command, no runs.log
      const runs = readFileSync(join(dir, 'rounds', e.task, 'runs.log'), 'utf8').trim().split('\n');
      expect(runs).toHaveLength(1);
    }
    // 2 rounds x (1 sample + label chunks + 2 train + 3 validate + 2 simulate): 6 frames -> 3 chunks, then 4 -> 2.
    expect(ended).toHaveLength(1 + 3 + 2 + 3 + 2 + (1 + 2 + 2 + 3 + 2));
  });

  it('gives commands their inputs through task.json and the environment', () => {
    const tj = JSON.parse(readFileSync(join(dir, 'rounds/r1/simulate/warm/task.json'), 'utf8'));
    expect(tj).toMatchObject({ campaign: 'engine test', round: 1, stage: 'simulate', task: 'r1/simulate/warm', outputs: { trajectory: 'trajectory.xyz' } });
    expect(tj.params).toMatchObject({ temperature: 90, steps: 10, committee: 2, condition: 'warm' });
    expect(tj.inputs.model_0).toBe(join(dir, 'rounds/r1/train/0000/model'));
    expect(tj.inputs.model_1).toBe(join(dir, 'rounds/r1/train/0001/model'));
    const script = readFileSync(join(dir, 'rounds/r1/simulate/warm/run.sh'), 'utf8');
    expect(script).toContain(`export RATCHET_IN_MODEL_1=${join(dir, 'rounds/r1/train/0001/model')}`);
    expect(script).toContain('export RATCHET_PARAM_TEMPERATURE=90');
    expect(script).toContain(`export RATCHET_OUT_TRAJECTORY=${join(dir, 'rounds/r1/simulate/warm/trajectory.xyz')}`);
    // Committee members get different seeds.
    const m0 = JSON.parse(readFileSync(join(dir, 'rounds/r0/train/0000/model'), 'utf8'));
    const m1 = JSON.parse(readFileSync(join(dir, 'rounds/r0/train/0001/model'), 'utf8'));
    expect(m0.seed).not.toBe(m1.seed);
    expect([m0.member, m1.member]).toEqual([0, 1]);
  });

  it('registers outputs with their producer and inputs, and lineage reaches the starting structures', () => {
    const arts = events.filter((e) => e.type === 'artifact');
    const traj = arts.find((a) => a.path === 'rounds/r1/simulate/cold/trajectory.xyz')!;
    expect(traj).toMatchObject({ role: 'trajectory', task: 'r1/simulate/cold', tool_version: expect.any(String) });
    expect(traj.command).toContain('fake-stage.mjs simulate');
    const campaignHash = events.find((e) => e.type === 'run_started')!.campaign_sha256;
    expect(arts.every((a) => a.campaign_sha256 === campaignHash)).toBe(true);
    const models = arts.filter((a) => a.role === 'model' && a.path.startsWith('rounds/r1/')).map((a) => a.id);
    expect(traj.inputs).toEqual(expect.arrayContaining(models));
    const pathsOf = (root: string): Set<string> => {
      const paths = new Set<string>();
      const walk = (n: any) => {
        if (n.path) paths.add(n.path);
        for (const a of n.also ?? []) paths.add(a.path);
        n.children.forEach(walk);
      };
      walk(upstream(events as any, root)!);
      return paths;
    };
    const tree = upstream(events as any, 'rounds/r1/simulate/cold/trajectory.xyz')!;
    expect(roots(tree).map((n) => n.path)).toContain('start.xyz');
    const up = pathsOf('rounds/r1/simulate/cold/trajectory.xyz');
    for (const p of ['rounds/r1/train/0000/model', 'rounds/r1/label/train.xyz', 'rounds/r0/label/labeled.xyz', 'rounds/r0/label/0000/labeled.xyz', 'rounds/r0/label/0000/frames.xyz', 'rounds/r0/sample/0000/frames.xyz', 'start.xyz']) {
      expect(up.has(p), p).toBe(true);
    }
    // Round 1's new frames came from round 0's trajectories.
    const test = pathsOf('rounds/r1/label/test.xyz');
    for (const p of ['rounds/r1/label/labeled.xyz', 'rounds/r1/label/0000/frames.xyz', 'rounds/r1/sample/0000/frames.xyz', 'rounds/r0/simulate/cold/trajectory.xyz', 'rounds/r0/simulate/warm/trajectory.xyz']) {
      expect(test.has(p), p).toBe(true);
    }
  });

  it('hands on files that an independent library (ASE) reads', () => {
    // Cross-check with ASE (Debian python3-ase), independent of ratchet's reader.
    const py = `
import sys
from ase.io import read
train = read(sys.argv[1], index=':')
traj = read(sys.argv[2], index=':')
print(len(train), train[0].get_potential_energy() is not None, train[0].get_forces().shape[0], len(traj), 'forces_1' in traj[0].arrays, 'source_frame' in traj[0].info)
`;
    const res = execFileSync('/usr/bin/python3', ['-c', py, join(dir, 'rounds/r1/label/train.xyz'), join(dir, 'rounds/r1/sample/0000/frames.xyz')], { encoding: 'utf8' });
    const [n, hasE, atoms, trajFrames, hasF1, hasSource] = res.trim().split(/\s+/);
    const check = JSON.parse(readFileSync(join(dir, 'rounds/r1/label/check.json'), 'utf8'));
    expect(Number(n)).toBe(check.train_frames);
    expect(hasE).toBe('True');
    expect(Number(atoms)).toBe(4);
    // The committee policy picked stages.sample.select.max_per_condition = 2 informative frames from each
    // of the two trajectories; the model's forces are stripped for labeling, the provenance is kept.
    expect(Number(trajFrames)).toBe(4);
    expect(hasF1).toBe('False');
    expect(hasSource).toBe('True');
    // Cumulative data set: round 1's train + test holds every frame labeled so far (6 + 4).
    expect(check.train_frames + check.test_frames).toBe(10);
  });

  it('reports status with verdicts and confident fractions', async () => {
    const s = await campaignStatus(file, () => undefined);
    expect(s.exitCode).toBe(0);
    const r = s.report!;
    expect(r.ended).toMatchObject({ state: 'converged', round: 1 });
    expect(r.rounds).toHaveLength(2);
    expect(r.rounds[0].conditions!.cold.confident_fraction).toBe(0);
    expect(r.rounds[1].conditions!.warm.confident_fraction).toBe(1);
    expect(r.rounds[1].stages.map((k) => k.phase)).toEqual(['passed', 'passed', 'passed', 'passed', 'passed']);
    const text = new BufferOutput();
    formatStatus(r, text);
    // validate warns: 4 held-out frames are too few to trust (fewer than 10); a warn still lets the campaign converge
    expect(text.text).toMatch(/r1\s+pass 1\/1\s+pass 2\/2\s+pass 2\/2\s+warn 3\/3\s+pass 2\/2/);
    expect(text.text).toContain('errors warn: judged on 4 frames (16 atoms, 48 force components): too few to trust');
    expect(text.text).toContain('confident fraction per condition (target 0.9)');
    expect(text.text).toMatch(/r0\s+0\.000\s+0\.000/);
    expect(text.text).toContain('campaign converged in round 1');
  });

  it('does nothing more when run again', async () => {
    const before = readFileSync(join(dir, '.ratchet/ledger.jsonl'), 'utf8');
    const again = new BufferOutput();
    const r = await runCampaign({ campaign: file, out: again });
    expect(r.exitCode).toBe(0);
    const after = readFileSync(join(dir, '.ratchet/ledger.jsonl'), 'utf8');
    expect(after.startsWith(before)).toBe(true);
    const added = after.slice(before.length).trim().split('\n').map((l) => JSON.parse(l).type);
    expect(added).toEqual(['run_started', 'run_ended']);
    expect(existsSync(join(dir, '.ratchet/lock'))).toBe(false);
  });
});
