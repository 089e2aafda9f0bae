/**
 * Benchmark: time from a Slurm job's completion to ratchet advancing the stage, on the one-node test
 * cluster (test/slurm/cluster.sh: Debian's Slurm 22.05 on localhost, started through test/slurm/cluster.ts if it
 * is not up, and stopped again at the end if it was started here).
 *
 *   npm run build && node --import tsx bench/slurm-latency.ts [--poll 30,5] [--rounds 3]
 *
 * The campaign is the engine tests' invented one (test/engine/fixture.ts: stage programs that take
 * well under a second), run by the built CLI as a user would: `ratchet run --backend slurm --follow`,
 * once per poll interval given. For every stage whose tasks ran as Slurm jobs:
 *   completion = the modification time of the last exit.json of the stage (written by the batch
 *                script's EXIT trap as the job's last act; nanosecond file times, whereas Slurm's
 *                own end times are whole seconds),
 *   advance    = the ledger time of the stage's 'stage_gated' event (its verdict, after which the next
 *                stage is planned).
 * Also the time from each exit.json to the task's 'task_ended' ledger event.
 */
import { spawnSync } from 'node:child_process';
import { statSync } from 'node:fs';
import { cpus, loadavg } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { ledgerEvents, makeCampaign, removeCampaigns } from '../test/engine/fixture.js';
import { ensureSlurm, stopIfStartedByTests } from '../test/slurm/cluster.js';

const ROOT = fileURLToPath(new URL('..', import.meta.url));

function arg(name: string, fallback: string): string {
  const i = process.argv.indexOf(`--${name}`);
  return i >= 0 && process.argv[i + 1] !== undefined ? process.argv[i + 1] : fallback;
}
const POLLS = arg('poll', '30,5').split(',').map(Number);
const ROUNDS = Number(arg('rounds', '3'));

const median = (xs: number[]): number => {
  const s = [...xs].sort((a, b) => a - b);
  const m = s.length >> 1;
  return s.length % 2 ? s[m] : (s[m - 1] + s[m]) / 2;
};
const f2 = (x: number) => x.toFixed(2);

try {
  ensureSlurm();
} catch (err) {
  console.error(`${(err as Error).message}\n(is Slurm installed? bash test/slurm/cluster.sh install)`);
  process.exit(1);
}

try {
  console.log(`node ${process.version}, ${cpus().length} cpus, load ${loadavg().map((x) => x.toFixed(1)).join(' ')}, ${new Date().toISOString()}`);
  console.log('| poll_interval s | stages | job end -> stage advanced: median s | min s | max s | job end -> task_ended recorded: median s | max s | run wall s |');
  console.log('|---|---|---|---|---|---|---|---|');
  for (const poll of POLLS) {
    const c = makeCampaign({ name: `latency-${poll}-${process.pid}`, maxRounds: ROUNDS, extraYaml: `  poll_interval: ${poll}\n` });
    const t0 = performance.now();
    const r = spawnSync(process.execPath, [join(ROOT, 'dist/cli/index.js'), 'run', c.file, '--backend', 'slurm', '--follow'], {
      encoding: 'utf8',
      env: { ...process.env, NO_COLOR: '1' },
    });
    const wall = (performance.now() - t0) / 1000;
    if (r.status !== 0 && r.status !== 1) throw new Error(`ratchet run exited ${r.status}:\n${r.stdout}\n${r.stderr}`);
    const events = ledgerEvents(c.dir);
    const exitTime = (task: string) => statSync(join(c.dir, 'rounds', task, 'exit.json')).mtimeMs;
    const slurmTasks = new Map<string, string>(); // task -> stage key
    for (const e of events) if (e.type === 'task_submitted' && e.backend === 'slurm') slurmTasks.set(e.task, e.task.split('/').slice(0, 2).join('/'));
    const advance: number[] = [];
    const recorded: number[] = [];
    for (const e of events) {
      if (e.type === 'task_ended' && slurmTasks.has(e.task) && e.state === 'succeeded') recorded.push((Date.parse(e.at) - exitTime(e.task)) / 1000);
      if (e.type !== 'stage_gated') continue;
      const key = `r${e.round}/${e.stage}`;
      const tasks = [...slurmTasks].filter(([, k]) => k === key).map(([t]) => t);
      if (tasks.length === 0) continue;
      const last = Math.max(...tasks.map(exitTime));
      advance.push((Date.parse(e.at) - last) / 1000);
    }
    console.log(
      `| ${poll} | ${advance.length} | ${f2(median(advance))} | ${f2(Math.min(...advance))} | ${f2(Math.max(...advance))} | ${f2(median(recorded))} | ${f2(Math.max(...recorded))} | ${wall.toFixed(1)} |`,
    );
  }
} finally {
  removeCampaigns();
  stopIfStartedByTests();
}
