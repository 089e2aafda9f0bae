/**
 * Engine benchmark (invented data).
 *
 *   node --import tsx bench/engine.ts [--tasks 10000] [--events 100000] [--repeat 3] [--dir /tmp]
 *
 * 1. Planning a stage of N tasks, end to end as `ratchet run` does it (planStage): a label stage whose
 *    sample output holds N frames (frames_per_task 1): read the frames, cut N chunks, hash them,
 *    build N task.json, render N batch scripts (local backend), write N task directories (chunk,
 *    task.json, run.sh), register the N chunks in the ledger (batched appends), record the stage.
 *    Phases are timed separately on one campaign, the whole planStage on another.
 * 2. `ratchet status`'s full fold: a ledger of M events (a realistic mix written the way the engine
 *    writes them) streamed, parsed, folded into the campaign state (applyEvent) and summarised
 *    (buildStatus), through campaignStatus() including loading the campaign file.
 * Times are wall clock, best and median of --repeat runs, per task / per event.
 */
import { createHash } from 'node:crypto';
import { mkdtempSync, rmSync, writeFileSync, mkdirSync } from 'node:fs';
import { cpus, loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { performance } from 'node:perf_hooks';
import { Journal, foldLedger } from '../src/ledger/journal.js';
import { Engine, bringInputsInside } from '../src/engine/context.js';
import { planStage } from '../src/engine/advance.js';
import { materialize, writeTasks } from '../src/engine/plan.js';
import { runCampaign } from '../src/engine/run.js';
import { BufferOutput } from '../src/engine/output.js';
import { foldEvents } from '../src/engine/state.js';
import { STAGE_DEFS } from '../src/engine/stages/index.js';
import { samplePolicy } from '../src/engine/sample-policy.js';
import { campaignStatus, foldCampaign } from '../src/engine/status.js';
import { campaignView } from '../src/engine/view.js';
import { loadCampaign } from '../src/campaign/load.js';
import { getBackend } from '../src/backends/registry.js';

function arg(name: string, fallback: number): number {
  const i = process.argv.indexOf(`--${name}`);
  return i >= 0 ? Number(process.argv[i + 1]) : fallback;
}
const N = arg('tasks', 10_000);
const M = arg('events', 100_000);
const REPEAT = arg('repeat', 3);
const BASE = (() => {
  const i = process.argv.indexOf('--dir');
  return i >= 0 ? process.argv[i + 1] : tmpdir();
})();

const median = (xs: number[]) => [...xs].sort((a, b) => a - b)[Math.floor(xs.length / 2)];
const best = (xs: number[]) => Math.min(...xs);

function frames(n: number): string {
  let t = '';
  for (let k = 0; k < n; k++) {
    t += `2\nLattice="6 0 0 0 6 0 0 0 6" Properties=species:S:1:pos:R:3 pbc="T T T"\n`;
    t += `Ar 0.0 0.0 ${(0.001 * (k % 997)).toFixed(6)}\nAr 3.0 3.0 3.0\n`;
  }
  return t;
}

const CAMPAIGN = (labelCmd: string) => `name: bench
species: [Ar]
start: start.xyz
committee: {size: 2}
conditions:
  - {name: cold, temperature: 30, steps: 10}
stages:
  sample: {perturb: {count: 1}}
  label: {command: ${JSON.stringify(labelCmd)}, frames_per_task: 1}
  train: {command: "true"}
  validate: {command: "true"}
  simulate: {command: "true"}
backend: {kind: local, jobs: 1}
`;

/** A campaign whose round-0 sample stage is done, holding N frames to label. */
async function sampledCampaign(): Promise<{ dir: string; file: string }> {
  const dir = mkdtempSync(join(BASE, 'ratchet-bench-engine-'));
  writeFileSync(join(dir, 'start.xyz'), frames(N));
  const file = join(dir, 'campaign.yaml');
  writeFileSync(file, CAMPAIGN('my-labeler --input "$RATCHET_IN_FRAMES" --output "$RATCHET_OUT_LABELED"'));
  const r = await runCampaign({ campaign: file, until: 'label', out: new BufferOutput() });
  if (r.exitCode !== 0) throw new Error('setup failed');
  return { dir, file };
}

async function engineFor(dir: string, file: string): Promise<{ engine: Engine; journal: Journal }> {
  const view = bringInputsInside(campaignView(await loadCampaign(file)), false);
  const journal = await Journal.open(dir, { handleSignals: false });
  const backend = getBackend('local', { jobs: 1 });
  return { engine: new Engine(view, journal, foldEvents(journal.history), backend, new BufferOutput(), samplePolicy), journal };
}

async function benchPlan(): Promise<void> {
  const phases: Record<string, number[]> = { 'baseline: mkdir + 3 small files, no ratchet': [], 'plan (read frames, chunk, hash)': [], 'materialize (task.json + render run.sh)': [], 'write task dirs': [], 'register chunks in the ledger': [], 'planStage end to end': [] };
  for (let rep = 0; rep < REPEAT; rep++) {
    {
      // What the file system alone costs for N task directories of three files (the floor for writing).
      const dir = mkdtempSync(join(BASE, 'ratchet-bench-floor-'));
      const t = performance.now();
      for (let k = 0; k < N; k++) {
        const d = join(dir, String(k).padStart(5, '0'));
        mkdirSync(d);
        writeFileSync(join(d, 'frames.xyz'), 'x'.repeat(120));
        writeFileSync(join(d, 'task.json'), 'x'.repeat(600));
        writeFileSync(join(d, 'run.sh'), 'x'.repeat(2800), { mode: 0o755 });
      }
      phases['baseline: mkdir + 3 small files, no ratchet'].push(performance.now() - t);
      rmSync(dir, { recursive: true, force: true });
    }
    {
      const { dir, file } = await sampledCampaign();
      const { engine, journal } = await engineFor(dir, file);
      let t = performance.now();
      const plan = await STAGE_DEFS.label.plan(engine.stageContext(0));
      phases['plan (read frames, chunk, hash)'].push(performance.now() - t);
      t = performance.now();
      const tasks = materialize(engine.view, 0, 'label', plan, engine.backend);
      phases['materialize (task.json + render run.sh)'].push(performance.now() - t);
      t = performance.now();
      writeTasks(engine.view, tasks);
      phases['write task dirs'].push(performance.now() - t);
      t = performance.now();
      await engine.registerMany(plan.artifacts);
      phases['register chunks in the ledger'].push(performance.now() - t);
      if (tasks.length !== N) throw new Error(`expected ${N} tasks, got ${tasks.length}`);
      await journal.close();
      rmSync(dir, { recursive: true, force: true });
    }
    {
      const { dir, file } = await sampledCampaign();
      const { engine, journal } = await engineFor(dir, file);
      const t = performance.now();
      await planStage(engine, 0, 'label');
      phases['planStage end to end'].push(performance.now() - t);
      await journal.close();
      rmSync(dir, { recursive: true, force: true });
    }
  }
  console.log(`\nplanning a label stage of ${N} tasks (best / median of ${REPEAT}):`);
  for (const [name, xs] of Object.entries(phases)) {
    console.log(`  ${name.padEnd(42)} ${best(xs).toFixed(0).padStart(6)} ms  ${((best(xs) / N) * 1000).toFixed(1).padStart(6)} µs/task   (median ${((median(xs) / N) * 1000).toFixed(1)} µs/task)`);
  }
}

/** A ledger of about M events, written as the engine writes them: rounds of five stages, many label tasks. */
function writeLedger(dir: string): number {
  const hex = (s: string) => createHash('sha256').update(s).digest('hex');
  const lines: string[] = [];
  let seq = 0;
  const at = '2026-01-01T00:00:00.000Z';
  const push = (e: Record<string, unknown>) => lines.push(JSON.stringify({ seq: ++seq, at, ...e }));
  const camp = hex('campaign');
  push({ type: 'run_started', command: 'run', backend: 'local', jobs: 2, host: 'h', pid: 1, campaign_sha256: camp, tool_version: '0.1.0' });
  const counts: Record<string, number> = { sample: 1, label: 400, train: 4, validate: 4, simulate: 3 };
  for (let r = 0; seq < M; r++) {
    for (const stage of ['sample', 'label', 'train', 'validate', 'simulate']) {
      const names = Array.from({ length: counts[stage] }, (_, k) => String(k).padStart(4, '0'));
      push({ type: 'stage_planned', round: r, stage, tasks: names, inputs: [`sha256:${hex(`in${r}${stage}`)}`] });
      for (const n of names) {
        const task = `r${r}/${stage}/${n}`;
        push({ type: 'task_submitted', task, attempt: 1, job_id: `1.${seq}`, backend: 'local' });
        push({ type: 'task_ended', task, attempt: 1, state: 'succeeded', exit_code: 0, start: at, end: at, host: 'h' });
        push({ type: 'artifact', id: `sha256:${hex(task)}`, path: `rounds/${task}/out.xyz`, role: 'labeled', task, inputs: [`sha256:${hex(`in${task}`)}`], command: 'label', campaign_sha256: camp, tool_version: '0.1.0', kind: 'file', bytes: 1000 });
      }
      push({ type: 'stage_gated', round: r, stage, verdict: 'pass', reasons: [], gates: [{ gate: 'contacts', verdict: 'pass', reasons: ['ok'], figures: { frames: 10 } }], figures: stage === 'simulate' ? { conditions: { cold: { frames: 10, confident: 5, informative: 5, runaway: 0, confident_fraction: 0.5 } } } : {} });
    }
  }
  mkdirSync(join(dir, '.ratchet'), { recursive: true });
  writeFileSync(join(dir, '.ratchet/ledger.jsonl'), lines.join('\n') + '\n');
  return seq;
}

async function benchStatus(): Promise<void> {
  const dir = mkdtempSync(join(BASE, 'ratchet-bench-status-'));
  writeFileSync(join(dir, 'start.xyz'), frames(1));
  writeFileSync(join(dir, 'campaign.yaml'), CAMPAIGN('true'));
  const events = writeLedger(dir);
  const fold: number[] = [];
  const full: number[] = [];
  const parse: number[] = [];
  for (let rep = 0; rep < REPEAT; rep++) {
    let t = performance.now();
    const n = await foldLedger(dir, (k: number) => k + 1, 0);
    parse.push(performance.now() - t);
    if (n.state !== events) throw new Error('read lost events');
    t = performance.now();
    const f = await foldCampaign(dir);
    fold.push(performance.now() - t);
    if (f.state.events !== events) throw new Error('fold lost events');
    t = performance.now();
    const s = await campaignStatus(join(dir, 'campaign.yaml'), (m) => console.error(m));
    full.push(performance.now() - t);
    if (s.report!.ledger.events !== events) throw new Error('status lost events');
  }
  console.log(`\nstatus over a ledger of ${events} events (best / median of ${REPEAT}):`);
  console.log(`  ${'read + parse only (foldLedger, no-op reducer)'.padEnd(42)} ${best(parse).toFixed(0).padStart(6)} ms  ${((best(parse) / events) * 1000).toFixed(2).padStart(6)} µs/event  (median ${((median(parse) / events) * 1000).toFixed(2)})`);
  console.log(`  ${'fold into campaign state (foldCampaign)'.padEnd(42)} ${best(fold).toFixed(0).padStart(6)} ms  ${((best(fold) / events) * 1000).toFixed(2).padStart(6)} µs/event  (median ${((median(fold) / events) * 1000).toFixed(2)})`);
  console.log(`  ${'campaignStatus (load + fold + summarise)'.padEnd(42)} ${best(full).toFixed(0).padStart(6)} ms  ${((best(full) / events) * 1000).toFixed(2).padStart(6)} µs/event  (median ${((median(full) / events) * 1000).toFixed(2)})`);
  rmSync(dir, { recursive: true, force: true });
}

console.log(`ratchet engine bench (files in ${BASE}): node ${process.version}, ${cpus().length} cpus (${cpus()[0]?.model ?? '?'}), load average ${loadavg().map((x) => x.toFixed(1)).join(' ')}`);
await benchPlan();
await benchStatus();
