/**
 * Benchmark: planning and rendering one stage of N tasks (default 10,000) for the local backend:
 * build each TaskSpec and task.json (as the engine does), render run.sh, and write both files
 * atomically into rounds/r0/label/<task>/. Reports time per task; the target is < 0.2 ms per task.
 *
 *   node --import tsx bench/render.ts [--tasks 10000] [--repeat 3] [--dir /tmp/somewhere]
 *
 * Phases reported (best of --repeat runs, each into a fresh folder):
 *   render         TaskSpec + renderScript only (no I/O)
 *   render+write   render + writeTaskFilesSync (mkdir, 2 temporary files, 2 renames per task)
 *   floor          plain mkdir + 2 writeFileSync of the same bytes, no rendering (what the file system costs)
 *   render+write (async, 64 at once)   the same through fs/promises
 */
import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { cpus, loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { performance } from 'node:perf_hooks';
import type { TaskSpec } from '../src/backends/backend.js';
import { renderScript } from '../src/backends/render.js';
import { toEnvName } from '../src/backends/shell.js';
import { writeTaskFiles, writeTaskFilesSync } from '../src/backends/task-files.js';
import { loadTemplates } from '../src/backends/templates.js';

function arg(name: string, fallback: string): string {
  const i = process.argv.indexOf(`--${name}`);
  return i >= 0 && process.argv[i + 1] !== undefined ? process.argv[i + 1] : fallback;
}

const N = Number(arg('tasks', '10000'));
const REPEAT = Number(arg('repeat', '3'));
const BASE = arg('dir', tmpdir());
const templates = loadTemplates('local');

/** One label task as the engine would plan it: a chunk of frames in, labeled frames out. */
function plan(campaignDir: string, i: number): { task: TaskSpec; json: object } {
  const name = String(i).padStart(Math.max(4, String(N - 1).length), '0');
  const dir = join(campaignDir, 'rounds', 'r0', 'label', name);
  const inputs = { frames: join(campaignDir, 'rounds', 'r0', 'sample', 'chunks', `${name}.xyz`) };
  const outputs = { labeled: 'labeled.xyz' };
  const seed = 1000 + i;
  const env: Record<string, string> = {
    RATCHET_SEED: String(seed),
    RATCHET_CAMPAIGN_DIR: campaignDir,
  };
  for (const [k, v] of Object.entries(inputs)) env[`RATCHET_IN_${toEnvName(k)}`] = v;
  for (const [k, v] of Object.entries(outputs)) env[`RATCHET_OUT_${toEnvName(k)}`] = join(dir, v);
  const task: TaskSpec = {
    id: `r0/label/${name}`,
    round: 0,
    stage: 'label',
    dir,
    command: 'python3 "$RATCHET_CAMPAIGN_DIR/programs/label.py" --in "$RATCHET_IN_FRAMES" --out "$RATCHET_OUT_LABELED"',
    setup: ['export OMP_NUM_THREADS=1'],
    env,
    resources: { cpus: 1, gpus: 0, walltime_s: 3600 },
    name: `argon-r0-label-${name}`,
  };
  const json = { campaign: 'argon', round: 0, stage: 'label', task: name, seed, inputs, params: { chunk: i, calculator: 'lj' }, outputs };
  return { task, json };
}

async function phase(label: string, body: (campaignDir: string) => Promise<void> | void): Promise<void> {
  const times: number[] = [];
  const cpuTimes: number[] = [];
  for (let r = 0; r < REPEAT; r++) {
    const campaignDir = mkdtempSync(join(BASE, 'ratchet-bench-render-'));
    const c0 = process.cpuUsage();
    const t0 = performance.now();
    await body(campaignDir);
    times.push(performance.now() - t0);
    const c = process.cpuUsage(c0);
    cpuTimes.push((c.user + c.system) / 1000);
    rmSync(campaignDir, { recursive: true, force: true });
  }
  const best = Math.min(...times);
  const median = [...times].sort((a, b) => a - b)[Math.floor(times.length / 2)];
  const cpu = Math.min(...cpuTimes);
  console.log(
    `${label.padEnd(34)} wall: best ${(best / N).toFixed(4)} ms/task, median ${(median / N).toFixed(4)} ms/task (best total ${(best / 1000).toFixed(2)} s); cpu (user+sys): best ${(cpu / N).toFixed(4)} ms/task`,
  );
}

console.log(`ratchet render benchmark: ${N} tasks, best of ${REPEAT}; node ${process.version}; ${cpus().length} cores (${cpus()[0]?.model ?? '?'}); load average ${loadavg().map((l) => l.toFixed(1)).join(' ')}; folder ${BASE}`);

let bytes = 0;
await phase('render', (c) => {
  for (let i = 0; i < N; i++) bytes += renderScript(plan(c, i).task, [], templates).length;
});
console.log(`  (mean script size ${Math.round(bytes / N / REPEAT)} bytes)`);
await phase('render+write (sync)', (c) => {
  for (let i = 0; i < N; i++) {
    const { task, json } = plan(c, i);
    writeTaskFilesSync(task.dir, renderScript(task, [], templates), json);
  }
});
// Reference floor, not ratchet code: the same folders and bytes with plain mkdir + writeFileSync
// (no rendering, no temporary file + rename). What the file system alone costs here.
const sample = renderScript(plan('/x', 0).task, [], templates);
const sampleJson = `${JSON.stringify(plan('/x', 0).json, null, 2)}\n`;
await phase('floor: mkdir + 2 plain writes', (c) => {
  mkdirSync(join(c, 'rounds', 'r0', 'label'), { recursive: true });
  for (let i = 0; i < N; i++) {
    const dir = join(c, 'rounds', 'r0', 'label', String(i).padStart(5, '0'));
    mkdirSync(dir);
    writeFileSync(join(dir, 'run.sh'), sample);
    writeFileSync(join(dir, 'task.json'), sampleJson);
  }
});
await phase('render+write (async, 64 at once)', async (c) => {
  let next = 0;
  const worker = async () => {
    for (let i = next++; i < N; i = next++) {
      const { task, json } = plan(c, i);
      await writeTaskFiles(task.dir, renderScript(task, [], templates), json);
    }
  };
  await Promise.all(Array.from({ length: 64 }, worker));
});
