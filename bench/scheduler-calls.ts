/**
 * Benchmark: scheduler calls per poll cycle for campaigns of 10, 1,000 and 10,000 queued tasks
 * (target: one call per cycle whatever the number of tasks), and sbatch calls per submission.
 *
 *   node --import tsx bench/scheduler-calls.ts [--sizes 10,1000,10000] [--cycles 3]
 *
 * The scheduler is fake but outside the process: executables `sbatch`, `squeue` and `scancel` put
 * first on PATH, each appending one line per invocation to a calls file, which is what is counted
 * (not the backend's own counter). sbatch hands out job ids; squeue prints every element of every
 * array it was given as PENDING, in the `squeue -O` format the backend asks for. The backend is the
 * real SlurmBackend, spawning those executables as it would spawn Slurm's.
 * Two layouts: arrays (max_array_size 1000, so 10,000 tasks are 10 arrays) and no arrays
 * (max_array_size 1: every task a job, so the id list is long and the query switches to the user's jobs).
 */
import { chmodSync, mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync, existsSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { performance } from 'node:perf_hooks';
import type { Submission, TaskSpec } from '../src/backends/backend.js';
import { SlurmBackend } from '../src/backends/slurm.js';
import { writeTaskFilesSync } from '../src/backends/task-files.js';

function arg(name: string, fallback: string): string {
  const i = process.argv.indexOf(`--${name}`);
  return i >= 0 && process.argv[i + 1] !== undefined ? process.argv[i + 1] : fallback;
}
const SIZES = arg('sizes', '10,1000,10000').split(',').map(Number);
/** Without arrays every task is one sbatch (a spawned process), so the big sizes are left out by default. */
const SINGLE_SIZES = arg('single-sizes', '10,1000').split(',').map(Number);
const CYCLES = Number(arg('cycles', '3'));

const FAKES: Record<string, string> = {
  sbatch: `#!/bin/bash
echo "sbatch $*" >> "$FAKE_DIR/calls"
n=$(( $(cat "$FAKE_DIR/next" 2>/dev/null || echo 100) + 1 )); echo $n > "$FAKE_DIR/next"
script="\${@: -1}"
size=$(grep -m1 -o -- '--array=1-[0-9]*' "$script" | sed 's/.*1-//')
echo "$n \${size:-0}" >> "$FAKE_DIR/jobs"
echo $n
`,
  squeue: `#!/bin/bash
echo "squeue $*" >> "$FAKE_DIR/calls"
case "$*" in *'%F|%j'*) exit 0 ;; esac
[ -f "$FAKE_DIR/jobs" ] || exit 0
awk '{ if ($2==0) printf "%s|%s|N/A|PENDING|Priority|0|N/A|fake|\\n",$1,$1; else for(i=1;i<=$2;i++) printf "%s|%s|%d|PENDING|Priority|0|N/A|fake|\\n",$1,$1,i }' "$FAKE_DIR/jobs"
`,
  scancel: `#!/bin/bash
echo "scancel $*" >> "$FAKE_DIR/calls"
`,
};

function calls(dir: string): string[] {
  const f = join(dir, 'calls');
  return existsSync(f) ? readFileSync(f, 'utf8').trim().split('\n').filter(Boolean) : [];
}

async function run(n: number, maxArraySize: number): Promise<{ submitCalls: number; perCycle: number[]; msPerCycle: number; queryArgs: string }> {
  const root = mkdtempSync(join(tmpdir(), 'ratchet-bench-calls-'));
  const fake = join(root, 'fake');
  mkdirSync(join(fake, 'bin'), { recursive: true });
  for (const [name, text] of Object.entries(FAKES)) {
    writeFileSync(join(fake, 'bin', name), text);
    chmodSync(join(fake, 'bin', name), 0o755);
  }
  process.env.FAKE_DIR = fake;
  process.env.PATH = `${join(fake, 'bin')}:${process.env.PATH}`;
  try {
    const b = new SlurmBackend({ maxArraySize, pollIntervalS: 0, user: 'bench' });
    const tasks: TaskSpec[] = [];
    for (let i = 0; i < n; i++) {
      const name = String(i).padStart(5, '0');
      const t: TaskSpec = {
        id: `r0/label/${name}`,
        round: 0,
        stage: 'label',
        dir: join(root, 'campaign', 'rounds', '0', 'label', name),
        command: 'true',
        setup: [],
        env: {},
        resources: { cpus: 1, gpus: 0, memory_mb: 100, walltime_s: 600 },
        name: `bench.r0/label/${name}`,
      };
      writeTaskFilesSync(t.dir, b.render(t), { task: t.id });
      tasks.push(t);
    }
    const subs: Submission[] = [];
    await b.submit(tasks, (s) => void subs.push(s));
    const submitCalls = calls(fake).filter((l) => l.startsWith('sbatch')).length;
    const perCycle: number[] = [];
    let ms = 0;
    let queryArgs = '';
    for (let c = 0; c < CYCLES; c++) {
      const before = calls(fake).length;
      const t0 = performance.now();
      const st = await b.poll(subs);
      ms += performance.now() - t0;
      if (st.some((s) => s.state !== 'queued')) throw new Error('expected every task queued');
      const made = calls(fake).slice(before);
      perCycle.push(made.length);
      queryArgs = made[0]?.replace(/ -O \S+/, ' -O <format>') ?? '';
    }
    return { submitCalls, perCycle, msPerCycle: ms / CYCLES, queryArgs };
  } finally {
    rmSync(root, { recursive: true, force: true });
  }
}

console.log('| queued tasks | layout | sbatch calls to submit | scheduler calls per poll cycle | ms per poll cycle | the call |');
console.log('|---:|---|---:|---|---:|---|');
for (const [layout, maxArray, sizes] of [
  ['arrays (max_array_size 1000)', 1000, SIZES],
  ['no arrays (max_array_size 1)', 1, SINGLE_SIZES],
] as const) {
  for (const n of sizes) {
    const r = await run(n, maxArray);
    const q = r.queryArgs.length > 70 ? `${r.queryArgs.slice(0, 67)}...` : r.queryArgs;
    console.log(`| ${n.toLocaleString('en')} | ${layout} | ${r.submitCalls} | ${r.perCycle.join(', ')} | ${r.msPerCycle.toFixed(0)} | \`${q}\` |`);
  }
}
