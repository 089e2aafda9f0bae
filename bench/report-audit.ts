/**
 * `ratchet report` and `ratchet audit` on a large synthetic campaign: 50 rounds, about 100,000
 * registered artifacts (1000 label tasks a round, each registering its chunk and its labeled frames),
 * with a ledger and files written here (invented data, sized like a long campaign). Measures:
 *   report (fold, collect, render every chart, write HTML)    target < 10 s
 *   audit, first (hashes every file)                            no target
 *   audit, incremental (nothing changed; then 10 files changed) target < 5 s
 *
 *   node --import tsx bench/report-audit.ts [--rounds 50] [--tasks 1000] [--keep DIR] [--reuse DIR]
 * (--keep: write the campaign there and leave it; --reuse: measure a campaign kept before, without writing one.)
 */
import { mkdirSync, mkdtempSync, rmSync, writeFileSync, openSync, writeSync, closeSync, appendFileSync } from 'node:fs';
import { createHash } from 'node:crypto';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { buildReport } from '../src/report/index.js';
import { auditCampaign } from '../src/ledger/audit.js';

const arg = (name: string, def: number): number => {
  const i = process.argv.indexOf(name);
  return i > 0 ? Number(process.argv[i + 1]) : def;
};
const ROUNDS = arg('--rounds', 50);
const TASKS = arg('--tasks', 1000);
const keepAt = Math.max(process.argv.indexOf('--keep'), process.argv.indexOf('--reuse'));
const reuse = process.argv.includes('--reuse');
const dir = keepAt > 0 ? process.argv[keepAt + 1] : mkdtempSync(join(tmpdir(), 'ratchet-bench-report-'));
mkdirSync(join(dir, '.ratchet'), { recursive: true });

const CONDITIONS = ['c100', 'c300', 'c600', 'c900'];
const campaign = `name: bench
species: [Ar]
start: start.xyz
committee:
  size: 4
rounds:
  max: ${ROUNDS}
conditions:
${CONDITIONS.map((c) => `  - name: ${c}\n    temperature: ${c.slice(1)}\n    steps: 1000`).join('\n')}
stages:
  label:
    command: "true"
  train:
    command: "true"
  validate:
    command: "true"
  simulate:
    command: "true"
budget:
  core_hours: 50000
  core_hours_per_round: 1500
backend:
  kind: local
`;
if (!reuse) writeFileSync(join(dir, 'campaign.yaml'), campaign);
const campaignSha = createHash('sha256').update(campaign).digest('hex');

function xyz(frames: number, seed: number, extra: (k: number) => string, forces = true): string {
  let s = '';
  for (let k = 0; k < frames; k++) {
    s += `4\nLattice="5.26 0 0 0 5.26 0 0 0 5.26" Properties=species:S:1:pos:R:3${forces ? ':forces:R:3' : ''} ${extra(k)} pbc="T T T"\n`;
    for (let i = 0; i < 4; i++) {
      const f = forces ? ` ${(Math.sin(seed + k + i) * 0.1).toFixed(5)} ${(Math.cos(seed + k * i) * 0.1).toFixed(5)} ${(Math.sin(seed * k + i) * 0.05).toFixed(5)}` : '';
      s += `Ar ${(i * 1.3).toFixed(3)} ${(k * 0.01).toFixed(3)} 0.000${f}\n`;
    }
  }
  return s;
}

let seq = 0;
const t0 = Date.parse('2026-01-01T00:00:00Z');
let clock = t0;
const ledger = reuse ? -1 : openSync(join(dir, '.ratchet/ledger.jsonl'), 'w');
let buf = '';
const emit = (e: Record<string, unknown>) => {
  clock += 50;
  buf += JSON.stringify({ seq: ++seq, at: new Date(clock).toISOString(), ...e }) + '\n';
  if (buf.length > 1 << 20) {
    writeSync(ledger, buf);
    buf = '';
  }
};
let artifacts = 0;
const art = (path: string, content: string, role: string, task: string | undefined, inputs: string[]): string => {
  const abs = join(dir, path);
  mkdirSync(join(abs, '..'), { recursive: true });
  writeFileSync(abs, content);
  const id = 'sha256:' + createHash('sha256').update(content).digest('hex');
  emit({ type: 'artifact', id, path, role, ...(task ? { task } : {}), inputs, campaign_sha256: campaignSha, tool_version: '0.1.0', kind: 'file', bytes: Buffer.byteLength(content) });
  artifacts++;
  return id;
};
const task = (id: string, hours: number) => {
  emit({ type: 'task_submitted', task: id, attempt: 1, job_id: `j${seq}`, backend: 'local', resources: { walltime_s: 3600, cpus: 1 } });
  const start = new Date(clock).toISOString();
  emit({ type: 'task_ended', task: id, attempt: 1, state: 'succeeded', exit_code: 0, start, end: new Date(clock + hours * 3_600_000).toISOString(), host: 'bench' });
  for (const f of ['task.json', 'run.sh', 'stdout.log', 'exit.json']) {
    const p = join(dir, 'rounds', id);
    mkdirSync(p, { recursive: true });
    writeFileSync(join(p, f), f);
  }
};

const tGen = performance.now();
if (!reuse) generate();
function generate(): void {
emit({ type: 'campaign_identity', name: 'bench', file: 'campaign.yaml', path: join(dir, 'campaign.yaml') });
emit({ type: 'run_started', command: 'run', backend: 'local', jobs: 2, host: 'bench', pid: 1, campaign_sha256: campaignSha, tool_version: '0.1.0' });
const start = art('start.xyz', xyz(4, 0, () => 'energy=-1'), 'start', undefined, []);
let prevTrain = start;
let trainTotal = 0;
let testTotal = 0;
for (let r = 0; r < ROUNDS; r++) {
  const R = `r${r}`;
  emit({ type: 'stage_planned', round: r, stage: 'sample', tasks: ['0000'], inputs: [start] });
  task(`${R}/sample/0000`, 0.001);
  const sampled = art(`rounds/${R}/sample/0000/frames.xyz`, xyz(2, r, () => ''), 'selected', `${R}/sample/0000`, [start]);
  emit({ type: 'stage_gated', round: r, stage: 'sample', verdict: 'pass', reasons: [], gates: [{ gate: 'frames', verdict: 'pass', reasons: [], figures: { frames: TASKS } }] });
  const names = Array.from({ length: TASKS }, (_, k) => String(k).padStart(4, '0'));
  emit({ type: 'stage_planned', round: r, stage: 'label', tasks: names, inputs: [sampled] });
  const labeled: string[] = [];
  for (const n of names) {
    const chunk = art(`rounds/${R}/label/${n}/frames.xyz`, `chunk ${r} ${n}\n`, 'chunk', undefined, [sampled]);
    task(`${R}/label/${n}`, 0.2);
    labeled.push(art(`rounds/${R}/label/${n}/labeled.xyz`, `labeled ${r} ${n}\n`, 'labeled', `${R}/label/${n}`, [chunk]));
  }
  const round = art(`rounds/${R}/label/labeled.xyz`, `round ${r}\n`, 'labeled_round', undefined, labeled);
  const nTest = 10;
  trainTotal += TASKS - nTest;
  testTotal += nTest;
  const train = art(`rounds/${R}/label/train.xyz`, `train ${r}\n`, 'training_set', undefined, [round, prevTrain]);
  const test = art(`rounds/${R}/label/test.xyz`, xyz(nTest, r, (k) => `energy=${(-1 - k * 0.001).toFixed(6)}`), 'test_set', undefined, [round]);
  prevTrain = train;
  const rejected = Array.from({ length: r % 5 }, (_, k) => ({ task: `${R}/label/0000`, frame: k, reason: k % 2 ? 'largest force component 52.1 eV/Å above max_force 50' : 'atoms 1 and 2 closer than 0.9 Å' }));
  emit({
    type: 'stage_gated', round: r, stage: 'label', verdict: 'pass', reasons: [],
    gates: [{ gate: 'labels', verdict: 'pass', reasons: [], figures: { frames: TASKS, accepted: TASKS - rejected.length, rejected_count: rejected.length, rejected, train_frames: trainTotal, test_frames: testTotal } }],
    figures: { frames: TASKS, accepted: TASKS - rejected.length, rejected: rejected.length, train_frames: trainTotal, test_frames: testTotal },
  });
  emit({ type: 'stage_planned', round: r, stage: 'train', tasks: ['0000', '0001', '0002', '0003'], inputs: [train] });
  const models: string[] = [];
  for (let m = 0; m < 4; m++) {
    task(`${R}/train/000${m}`, 4);
    models.push(art(`rounds/${R}/train/000${m}/model`, `model ${r} ${m}\n`, 'model', `${R}/train/000${m}`, [train]));
  }
  emit({ type: 'stage_gated', round: r, stage: 'train', verdict: 'pass', reasons: [], gates: [{ gate: 'exit', verdict: 'pass', reasons: [], figures: { models: 4 } }] });
  emit({ type: 'stage_planned', round: r, stage: 'validate', tasks: ['errors', 'nve-c100', 'nve-c600'], inputs: [...models, test] });
  task(`${R}/validate/errors`, 0.5);
  art(`rounds/${R}/validate/errors/predictions.xyz`, xyz(nTest, r + 0.3, (k) => `energy=${(-1 - k * 0.001 + 0.0004 / (r + 1)).toFixed(6)}`), 'predictions', `${R}/validate/errors`, [...models, test]);
  const gates: Record<string, unknown>[] = [];
  const f = 40 / Math.sqrt(r + 1);
  gates.push({
    gate: 'errors', verdict: 'pass', reasons: [], task: `${R}/validate/errors`,
    figures: {
      energy_mae_meV_per_atom: f / 20, energy_rmse_meV_per_atom: f / 15, force_mae_meV_per_A: f, force_rmse_meV_per_A: f * 1.3,
      per_element: { Ar: { force_mae_meV_per_A: f, force_rmse_meV_per_A: f * 1.3 } },
      limits: { energy_rmse: { warn: 5, fail: 10 }, force_rmse: { warn: 100, fail: 150 } },
    },
  });
  for (const c of ['c100', 'c600']) {
    task(`${R}/validate/nve-${c}`, 1);
    const p = `rounds/${R}/validate/nve-${c}/trajectory.xyz`;
    art(p, xyz(200, r, (k) => `energy=-1 total_energy=${(-4 + k * 1e-5 * (1 + (c === 'c600' ? 1 : 0))).toFixed(7)} time=${k * 10}`, false), 'validation', `${R}/validate/nve-${c}`, models);
    gates.push({ gate: 'drift', verdict: 'pass', reasons: [], task: `${R}/validate/nve-${c}`, figures: { slope_meV_per_atom_per_ps: 0.25, slope_se_meV_per_atom_per_ps: 0.01, limits: { max_drift: { warn: 0.5, fail: 1 } }, files: [{ path: p, first_frame: 0, frames: 200 }] } });
  }
  emit({ type: 'stage_gated', round: r, stage: 'validate', verdict: 'pass', reasons: [], gates });
  emit({ type: 'stage_planned', round: r, stage: 'simulate', tasks: CONDITIONS, inputs: models });
  const conditions: Record<string, unknown> = {};
  const sgates: Record<string, unknown>[] = [];
  for (const [ci, c] of CONDITIONS.entries()) {
    task(`${R}/simulate/${c}`, 2);
    art(`rounds/${R}/simulate/${c}/trajectory.xyz`, `traj ${r} ${c}\n`, 'trajectory', `${R}/simulate/${c}`, models);
    const spreads = Array.from({ length: 200 }, (_, k) => 0.02 + (0.3 * (ci + 1)) / (r + 2) * Math.abs(Math.sin(k * 1.7 + r)));
    const band = spreads.map((s) => (s < 0.05 ? 'confident' : s < 0.5 ? 'informative' : 'runaway'));
    const count = (b: string) => band.filter((x) => x === b).length;
    conditions[c] = { frames: 200, confident: count('confident'), informative: count('informative'), runaway: count('runaway'), confident_fraction: count('confident') / 200, mean_temperature_K: Number(c.slice(1)) };
    sgates.push({ gate: 'committee', verdict: 'pass', reasons: [], task: `${R}/simulate/${c}`, figures: { frames: 200, max_spread: spreads, band, window: { lower: 0.05, upper: 0.5 } } });
  }
  emit({ type: 'stage_gated', round: r, stage: 'simulate', verdict: 'pass', reasons: [], gates: sgates, figures: { conditions } });
}
emit({ type: 'run_ended', outcome: 'finished', exit_code: 0 });
writeSync(ledger, buf);
closeSync(ledger);
}
const genS = (performance.now() - tGen) / 1000;

const time = async <T>(f: () => Promise<T>): Promise<[T, number]> => {
  const s = performance.now();
  const v = await f();
  return [v, (performance.now() - s) / 1000];
};
const [rep, repS] = await time(() => buildReport(join(dir, 'campaign.yaml')));
writeFileSync(join(dir, 'report.html'), rep.html);
const [a1, a1S] = await time(() => auditCampaign(dir, { full: true }));
const [a2, a2S] = await time(() => auditCampaign(dir));
for (let k = 0; k < 10; k++) appendFileSync(join(dir, `rounds/r${k % ROUNDS}/label/${String(k).padStart(4, "0")}/labeled.xyz`), "x");
const [a3, a3S] = await time(() => auditCampaign(dir));

const mem = process.memoryUsage().rss / 2 ** 20;
console.log(`synthetic campaign: ${ROUNDS} rounds, ${a1.registered} artifacts, ${a1.ledger.events} ledger events${reuse ? '' : ` (written in ${genS.toFixed(1)} s)`} in ${dir}`);
console.log(`| step | seconds | detail |`);
console.log(`|---|---|---|`);
console.log(`| report | ${repS.toFixed(2)} | ${rep.charts.filter((c) => c.svg).length}/${rep.charts.length} charts, ${(rep.html.length / 2 ** 20).toFixed(1)} MiB HTML |`);
console.log(`| audit, first | ${a1S.toFixed(2)} | hashed ${a1.hashed}, clean ${a1.clean} |`);
console.log(`| audit, incremental, nothing changed | ${a2S.toFixed(2)} | hashed ${a2.hashed}, from cache ${a2.from_cache} |`);
console.log(`| audit, incremental, 10 files changed | ${a3S.toFixed(2)} | hashed ${a3.hashed}, changed ${a3.changed.length} |`);
console.log(`peak RSS ${mem.toFixed(0)} MiB`);
if (keepAt < 0) rmSync(dir, { recursive: true, force: true });
