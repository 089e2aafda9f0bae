/**
 * CRASH AND RESUME. `ratchet run` is killed with SIGKILL at more than twenty points of a small campaign
 * (right after ledger writes, after a stage's task directories are written but before it is recorded as
 * planned, after a task is recorded as submitted but before it starts, while tasks run, after an output
 * is hashed but before it is registered, after merged files are written, after a failed attempt's
 * records are moved aside, after a gate is computed but before its verdict is written, after a round's
 * last verdict but before the round is judged) and run again
 * each time. The killing uses the engine's test hook RATCHET_TEST_KILL_AT (src/engine/testhook.ts).
 * The campaign must end with the same artifacts (same paths, same hashes) as an uninterrupted run,
 * no finished task run twice (runs.log counts), and no ledger line lost.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, readFileSync, readdirSync, statSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { livePid } from '../../src/backends/local.js';
import { runCampaign } from '../../src/engine/run.js';
import { BufferOutput } from '../../src/engine/output.js';
import { REPO, cliArgs, ledgerEvents, makeCampaign, removeCampaigns } from './fixture.js';

/** Latest artifact id at each path. */
function finalArtifacts(dir: string): Map<string, string> {
  const m = new Map<string, string>();
  for (const e of ledgerEvents(dir)) if (e.type === 'artifact') m.set(e.path, e.id);
  return m;
}

function runsLogs(dir: string): Map<string, number> {
  const out = new Map<string, number>();
  const walk = (d: string) => {
    for (const n of readdirSync(d)) {
      const p = join(d, n);
      if (n === 'attempts') continue;
      if (statSync(p).isDirectory()) walk(p);
      else if (n === 'runs.log') out.set(p.slice(dir.length + 1), readFileSync(p, 'utf8').trim().split('\n').length);
    }
  };
  walk(join(dir, 'rounds'));
  return out;
}

const fixture = () => {
  const c = makeCampaign({ attempts: 2, maxRounds: 3 });
  // Round 0's train/0001 fails once and is run again by itself: exercises the 'archived' point.
  writeFileSync(join(c.dir, 'fail-once-train-0001'), '');
  return c;
};

// Kill points, in the order the runs meet them (each counted within its own process).
const KILLS = [
  'append:3', 'submitted:1', 'hashed:1', 'gated:1', 'planned:1', 'submitted:2', 'running:1', 'append:2',
  'merged:1', 'hashed:1', 'running:1', 'archived:1',
  // Between round 0's last verdict and its judgement (converged or not), twice in a row.
  'judging:1', 'judging:1',
  'append:6', 'planned:1', 'running:1', 'gated:1', 'submitted:3', 'running:1', 'hashed:1', 'append:4',
  'planned:1', 'running:1', 'merged:1', 'append:9', 'judging:1',
];

afterAll(removeCampaigns);

describe('crash and resume', () => {
  it('ends as an uninterrupted run would, whatever the point a SIGKILL lands', async () => {
    const ref = fixture();
    const r = await runCampaign({ campaign: ref.file, out: new BufferOutput() });
    expect(r.exitCode).toBe(0);
    const expected = finalArtifacts(ref.dir);
    // start 1; r0: selected 1, chunks 3, labeled 3, merged 3, models 2, predictions 1, nve 2, trajectories 2; r1: 1 + 2 + 2 + 3 + 2 + 1 + 2 + 2.
    expect(expected.size).toBe(33);

    const { dir, file } = fixture();
    let previous = '';
    let killed = 0;
    const killedAt: string[] = [];
    const cli = (env: Record<string, string>) =>
      spawnSync(process.execPath, [...cliArgs(), 'run', file], {
        cwd: REPO,
        env: { ...process.env, NO_COLOR: '1', ...env },
        encoding: 'utf8',
        timeout: 120_000,
      });
    const checkLedger = () => {
      const text = existsSync(join(dir, '.ratchet/ledger.jsonl')) ? readFileSync(join(dir, '.ratchet/ledger.jsonl'), 'utf8') : '';
      // No line lost: what was there before is still there, unchanged, and every line is whole.
      expect(text.startsWith(previous)).toBe(true);
      expect(text === '' || text.endsWith('\n')).toBe(true);
      const seqs = text.split('\n').filter(Boolean).map((l) => JSON.parse(l).seq);
      expect(seqs).toEqual(seqs.map((_, i) => i + 1));
      previous = text;
    };
    for (const point of KILLS) {
      const res = cli({ RATCHET_TEST_KILL_AT: point });
      if (res.signal === 'SIGKILL') {
        killed++;
        killedAt.push(point);
      } else {
        expect(res.status, `${point}: ${res.stderr}`).toBe(0);
      }
      checkLedger();
    }
    expect(killed, `killed at: ${killedAt.join(' ')}`).toBeGreaterThanOrEqual(20);
    // Different kinds of points were met.
    for (const p of ['append', 'submitted', 'running', 'hashed', 'planned', 'merged', 'archived', 'gated', 'judging']) {
      expect(killedAt.some((k) => k.startsWith(`${p}:`)), `${p} (killed at: ${killedAt.join(" ")})`).toBe(true);
    }

    const last = cli({});
    expect(last.status, last.stderr).toBe(0);
    expect(last.stdout).toContain('campaign converged in round 1');
    checkLedger();

    // Same final artifacts, same hashes.
    const got = finalArtifacts(dir);
    expect([...got.keys()].sort()).toEqual([...expected.keys()].sort());
    for (const [path, id] of expected) expect(got.get(path), path).toBe(id);

    // No finished task ran twice: one run each, except the task told to fail once (two attempts).
    const counts = runsLogs(dir);
    expect(counts).toEqual(runsLogs(ref.dir));
    for (const [path, n] of counts) expect(n, path).toBe(path === 'rounds/r0/train/0001/runs.log' ? 2 : 1);

    // Every artifact was registered once: never twice, whatever collect was cut short.
    const ev = ledgerEvents(dir);
    const regs = ev.filter((e) => e.type === 'artifact').map((e) => `${e.path} ${e.id}`);
    expect(regs).toHaveLength(expected.size);
    expect(new Set(regs).size).toBe(regs.length);
    // Every attempt was submitted once and ended once; nothing is left running.
    const keys = (type: string) => ev.filter((e) => e.type === type).map((e) => `${e.task}#${e.attempt}`);
    expect(new Set(keys('task_submitted')).size).toBe(keys('task_submitted').length);
    expect(new Set(keys('task_ended')).size).toBe(keys('task_ended').length);
    for (const t of new Set(ev.filter((e) => e.type === 'task_submitted').map((e) => e.task))) {
      expect(livePid(join(dir, 'rounds', t))).toBeUndefined();
    }
  }, 900_000);
});
