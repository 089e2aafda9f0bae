#!/usr/bin/env node
/**
 * Ledger benchmark: write a ledger of N events (default 100,000) with a realistic mix of engine events
 * (run_started, stage_planned, task_submitted, task_ended, artifact, stage_gated; invented data), then
 * time reading + parsing + folding it the way `ratchet status` and `ratchet lineage` do.
 *
 *   npm run build && node bench/ledger.mjs [--events 100000] [--repeat 5]
 *   node --import tsx bench/ledger.mjs --src        (straight from src/, no build)
 *   --keep leaves the ledger in its temporary directory (printed) for other measurements.
 *
 * Prints one table; figures are wall-clock per event (median of --repeat runs, and the best run).
 */
import { existsSync, mkdtempSync, rmSync, statSync } from 'node:fs';
import { tmpdir, cpus, loadavg } from 'node:os';
import { join } from 'node:path';
import { createHash } from 'node:crypto';

const args = process.argv.slice(2);
const opt = (name, dflt) => {
  const i = args.indexOf(`--${name}`);
  return i >= 0 ? Number(args[i + 1]) : dflt;
};
const N = opt('events', 100_000);
const REPEAT = opt('repeat', 5);
const useSrc = args.includes('--src') || !existsSync(new URL('../dist/ledger/index.js', import.meta.url));
const base = useSrc ? '../src/' : '../dist/';
const ext = useSrc ? '.ts' : '.js';
const L = await import(`${base}ledger/index${ext}`);
let engineState = null;
try {
  engineState = await import(`${base}engine/state${ext}`);
} catch {
  /* the engine's fold is measured only when it is there */
}

const hex = (s) => createHash('sha256').update(s).digest('hex');
const CAMPAIGN_SHA = hex('campaign');
const STAGES = ['sample', 'label', 'train', 'validate', 'simulate'];
const TASKS = { sample: 4, label: 100, train: 4, validate: 4, simulate: 8 };

/** Engine-shaped events, round after round, until n events. */
function* engineEvents(n) {
  let count = 0;
  const emit = function* (e) {
    if (count++ < n) yield e;
  };
  yield* emit({ type: 'run_started', command: 'run', backend: 'local', jobs: 2, host: 'bench', pid: 1, campaign_sha256: CAMPAIGN_SHA, tool_version: '0.1.0' });
  let prev = [hex('start')];
  yield* emit({ type: 'artifact', id: 'sha256:' + prev[0], path: 'structures/start.xyz', role: 'start', inputs: [], campaign_sha256: CAMPAIGN_SHA, tool_version: '0.1.0', bytes: 12345, kind: 'file' });
  for (let round = 0; count < n; round++) {
    for (const stage of STAGES) {
      const names = Array.from({ length: TASKS[stage] }, (_, i) => String(i).padStart(4, '0'));
      yield* emit({ type: 'stage_planned', round, stage, tasks: names, inputs: prev.map((h) => 'sha256:' + h) });
      const made = [];
      for (const name of names) {
        const task = `r${round}/${stage}/${name}`;
        yield* emit({ type: 'task_submitted', task, attempt: 1, job_id: String(count), backend: 'local' });
        yield* emit({ type: 'task_ended', task, attempt: 1, state: 'succeeded', exit_code: 0, start: '2024-05-01T10:00:00.000Z', end: '2024-05-01T10:05:00.000Z', host: 'node01' });
        const h = hex(task);
        made.push(h);
        yield* emit({
          type: 'artifact',
          id: 'sha256:' + h,
          path: `rounds/${round}/${stage}/${name}/out.xyz`,
          role: stage === 'label' ? 'labeled' : stage === 'train' ? 'model' : stage === 'simulate' ? 'trajectory' : stage,
          task,
          inputs: prev.slice(0, 4).map((p) => 'sha256:' + p),
          command: `python ${stage}.py --chunk ${name}`,
          campaign_sha256: CAMPAIGN_SHA,
          tool_version: '0.1.0',
          bytes: 100_000,
          kind: 'file',
          round,
          stage,
        });
      }
      yield* emit({ type: 'stage_gated', round, stage, verdict: 'pass', reasons: [], gates: [{ gate: 'contacts', verdict: 'pass', reasons: [], figures: { min_ratio: 0.81 } }] });
      prev = made;
    }
  }
}

/** A status-like fold: task states by round/stage, latest verdicts, artifact count. */
function statusReducer(s, e) {
  switch (e.type) {
    case 'stage_planned':
      s.stages.set(`r${e.round}/${e.stage}`, { planned: e.tasks.length, ended: 0, verdict: undefined });
      break;
    case 'task_ended': {
      s.states.set(e.task, e.state);
      const k = e.task.slice(0, e.task.lastIndexOf('/'));
      const st = s.stages.get(k);
      if (st) st.ended++;
      break;
    }
    case 'stage_gated': {
      const st = s.stages.get(`r${e.round}/${e.stage}`);
      if (st) st.verdict = e.verdict;
      break;
    }
    case 'artifact':
      s.artifacts++;
      break;
  }
  return s;
}

function median(xs) {
  const a = [...xs].sort((x, y) => x - y);
  return a[Math.floor(a.length / 2)];
}

/** Wall-clock and CPU time (user + system of this process) per run; the machine may be shared. */
async function time(fn) {
  const ms = [];
  const cpu = [];
  let out;
  for (let i = 0; i < REPEAT; i++) {
    const c0 = process.cpuUsage();
    const t0 = process.hrtime.bigint();
    out = await fn();
    ms.push(Number(process.hrtime.bigint() - t0) / 1e6);
    const c = process.cpuUsage(c0);
    cpu.push((c.user + c.system) / 1000);
  }
  return { med: median(ms), best: Math.min(...ms), cpu: median(cpu), out };
}

const loadBefore = loadavg().map((x) => x.toFixed(2)).join(' ');
const dir = mkdtempSync(join(tmpdir(), 'ratchet-bench-ledger-'));
try {
  // Write: batches of 1000 events, one write + one fdatasync per batch.
  const events = [...engineEvents(N)];
  const t0 = process.hrtime.bigint();
  const j = await L.Journal.open(dir, { log: () => undefined, handleSignals: false });
  for (let i = 0; i < events.length; i += 1000) await j.appendMany(events.slice(i, i + 1000));
  await j.close();
  const writeMs = Number(process.hrtime.bigint() - t0) / 1e6;
  const size = statSync(L.ledgerPath(dir)).size;

  // Single appends, each synced (what the engine does per state change): latency.
  const d2 = mkdtempSync(join(tmpdir(), 'ratchet-bench-append-'));
  const j2 = await L.Journal.open(d2, { log: () => undefined, handleSignals: false });
  const A = 300;
  const t1 = process.hrtime.bigint();
  for (let i = 0; i < A; i++) await j2.append(events[2 + (i % 1000)]);
  const appendMs = Number(process.hrtime.bigint() - t1) / 1e6;
  await j2.close();
  rmSync(d2, { recursive: true, force: true });

  const rows = [];
  const row = (what, r, n) => rows.push([what, r.med, r.best, (r.med * 1000) / n, (r.cpu * 1000) / n]);

  // Reference floor: the whole file in one string, split, JSON.parse per line, nothing else.
  const { readFileSync } = await import('node:fs');
  const floor = await time(() => {
    const text = readFileSync(L.ledgerPath(dir), 'utf8');
    let n = 0;
    let from = 0;
    for (let nl = text.indexOf('\n'); nl !== -1; nl = text.indexOf('\n', from)) {
      n += JSON.parse(text.slice(from, nl)).seq > 0 ? 1 : 0;
      from = nl + 1;
    }
    return n;
  });
  row('reference: readFileSync + JSON.parse per line (no checks)', floor, N);
  const count = await time(() => L.foldLedger(dir, (c) => c + 1, 0));
  if (count.out.count !== N) throw new Error(`folded ${count.out.count} events, wrote ${N}`);
  row('read + parse (count only)', count, N);
  row('read + parse + status fold', await time(() => L.foldLedger(dir, statusReducer, { stages: new Map(), states: new Map(), artifacts: 0 })), N);
  if (engineState) {
    row("read + parse + engine's applyEvent fold", await time(() => L.foldLedger(dir, engineState.applyEvent, engineState.emptyState())), N);
  }
  row('read + parse + lineage graph', await time(() => L.foldLedger(dir, L.addToLineage, L.emptyLineageGraph())), N);
  row('readLedger (all events in an array)', await time(() => L.readLedger(dir)), N);
  const graph = (await L.foldLedger(dir, L.addToLineage, L.emptyLineageGraph())).state;
  const lastArt = [...graph.byId.keys()].pop();
  const up = await time(() => L.upstream(graph, lastArt));
  const nodes = (function c(n) {
    return 1 + n.children.reduce((s, k) => s + c(k), 0);
  })(up.out);
  rows.push([`upstream tree of the last artifact (${nodes} nodes)`, up.med, up.best, NaN, NaN]);

  const cpu = cpus()[0]?.model ?? 'unknown CPU';
  console.log(`ledger: ${N} events, ${(size / 1e6).toFixed(1)} MB (${(size / N).toFixed(0)} bytes/event); node ${process.version}; ${cpu}; ${useSrc ? 'src via tsx' : 'dist'}`);
  console.log(`write: ${writeMs.toFixed(0)} ms in batches of 1000 (${((writeMs * 1000) / N).toFixed(2)} µs/event); single synced append: ${(appendMs / A).toFixed(2)} ms each (${A} appends)`);
  console.log(`load average before: ${loadBefore}; after: ${loadavg().map((x) => x.toFixed(2)).join(' ')} (${cpus().length} cores)`);
  console.log(`| measurement | median ms | best ms | µs/event, wall (median) | µs/event, CPU (median) |`);
  console.log(`|---|---:|---:|---:|---:|`);
  const f = (x) => (Number.isNaN(x) ? '–' : x.toFixed(2));
  for (const [w, m, b, per, cpuPer] of rows) console.log(`| ${w} | ${m.toFixed(1)} | ${b.toFixed(1)} | ${f(per)} | ${f(cpuPer)} |`);
} finally {
  if (args.includes('--keep')) console.log(`ledger kept in ${dir}`);
  else rmSync(dir, { recursive: true, force: true });
}
