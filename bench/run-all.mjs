#!/usr/bin/env node
/**
 * Runs every benchmark in turn (after `npm run build`, which `npm run bench` does first).
 * Each prints its own table; bench/RESULTS.md records figures with the command that produced them.
 * Pass names to run only some: node bench/run-all.mjs neighbours ledger
 */
import { spawnSync } from 'node:child_process';
import { fileURLToPath } from 'node:url';

const root = fileURLToPath(new URL('..', import.meta.url));
const tsx = ['--import', 'tsx'];
const benches = {
  xyz: ['bench/xyz-bench.mjs'],
  neighbours: ['bench/neighbours.mjs'],
  ledger: ['bench/ledger.mjs'],
  render: [...tsx, 'bench/render.ts'],
  engine: [...tsx, 'bench/engine.ts'],
  report: [...tsx, 'bench/report-audit.ts'],
  scheduler: [...tsx, 'bench/scheduler-calls.ts'],
  // needs Slurm installed (bash test/slurm/cluster.sh install); starts and stops the test cluster itself
  slurm: [...tsx, 'bench/slurm-latency.ts'],
  // the full example campaigns outside the repository (argon from a packed and installed package; water-xtb needs xtb, ASE, numpy)
  'example-argon': ['bench/examples.mjs', 'argon'],
  'example-water-xtb': ['bench/examples.mjs', 'water-xtb'],
};
const wanted = process.argv.slice(2);
let failed = 0;
for (const [name, args] of Object.entries(benches)) {
  if (wanted.length && !wanted.includes(name)) continue;
  if (name === 'example-water-xtb' && spawnSync('sh', ['-c', "command -v xtb && /usr/bin/python3 -c 'import ase, numpy'"]).status !== 0) {
    console.log('\n== example-water-xtb: skipped (needs xtb and /usr/bin/python3 with ASE and numpy)');
    continue;
  }
  if (name === 'slurm' && spawnSync('sh', ['-c', 'command -v sbatch && command -v slurmctld']).status !== 0) {
    console.log('\n== slurm: skipped (Slurm is not installed; bash test/slurm/cluster.sh install)');
    continue;
  }
  console.log(`\n== ${name}: node ${args.join(' ')}`);
  const r = spawnSync(process.execPath, args, { cwd: root, stdio: 'inherit' });
  if (r.status !== 0) {
    console.error(`bench ${name} exited with ${r.status}`);
    failed++;
  }
}
process.exitCode = failed ? 1 : 0;
