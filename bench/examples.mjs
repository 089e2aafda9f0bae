#!/usr/bin/env node
// Full runs of the example campaigns, outside the repository, with their figures from the ledger.
//
//   node bench/examples.mjs argon       # npm pack + install into a fresh prefix, `ratchet init --example argon`, run it
//   node bench/examples.mjs water-xtb   # `ratchet init --example water-xtb` (xtb, ASE, numpy), run it
//
// Needs a built package (`npm run build`). Prints the wall time, the outcome, and per round the labeled
// frames, the validate figures (errors against the reference, energy drift) and each condition's
// confident fraction, as Markdown for bench/RESULTS.md. Keeps nothing (the temporary folder is removed
// unless --keep).
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, readdirSync, realpathSync, rmSync } from 'node:fs';
import { loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';

const REPO = fileURLToPath(new URL('../', import.meta.url));
const name = process.argv[2];
const keep = process.argv.includes('--keep');
if (name !== 'argon' && name !== 'water-xtb') {
  console.error('usage: node bench/examples.mjs argon|water-xtb [--keep]');
  process.exit(2);
}
const root = realpathSync(mkdtempSync(join(tmpdir(), `ratchet-bench-${name}-`)));
let bin = [join(REPO, 'dist/cli/index.js')];
if (name === 'argon') {
  execFileSync('npm', ['pack', '--ignore-scripts', '--pack-destination', root], { cwd: REPO, stdio: 'pipe' });
  const tgz = readdirSync(root).find((f) => f.endsWith('.tgz'));
  execFileSync('npm', ['install', '--prefix', join(root, 'prefix'), join(root, tgz), '--prefer-offline', '--no-audit', '--no-fund', '--ignore-scripts'], { stdio: 'pipe' });
  bin = [join(root, 'prefix/node_modules/ratchet/dist/cli/index.js')];
}
const camp = join(root, name);
execFileSync('node', [...bin, 'init', '--example', name, camp], { stdio: 'pipe' });
const load0 = loadavg()[0];
const t0 = performance.now();
const run = spawnSync('node', [...bin, 'run', 'campaign.yaml'], { cwd: camp, encoding: 'utf8', maxBuffer: 256 << 20 });
const wall = (performance.now() - t0) / 1000;
const load1 = loadavg()[0];
const ledger = readFileSync(join(camp, '.ratchet/ledger.jsonl'), 'utf8').trim().split('\n').map((l) => JSON.parse(l));
const ended = ledger.find((e) => e.type === 'campaign_ended');
const gated = ledger.filter((e) => e.type === 'stage_gated');
const tasks = ledger.filter((e) => e.type === 'task_ended');
const f = (x, d = 1) => (typeof x === 'number' ? x.toFixed(d) : '–');

console.log(`### ${name}: ${ended ? `${ended.state} in round ${ended.round}` : `not finished (exit ${run.status})`}`);
console.log(`\nwall ${wall.toFixed(0)} s, ${tasks.length} task attempts, load average ${load0.toFixed(1)} at the start, ${load1.toFixed(1)} at the end\n`);
const rounds = [...new Set(gated.map((g) => g.round))].sort((a, b) => a - b);
const conds = [...new Set(gated.filter((g) => g.stage === 'simulate').flatMap((g) => Object.keys(g.figures?.conditions ?? {})))];
console.log(`| round | labeled (train/test) | energy RMSE meV/atom | force RMSE meV/Å | drift slope meV/atom/ps (per condition) | ${conds.map((c) => `confident ${c}`).join(' | ')} |`);
console.log(`|---|---|---|---|---|${conds.map(() => '---').join('|')}|`);
for (const r of rounds) {
  const at = (s) => gated.filter((g) => g.round === r && g.stage === s).at(-1);
  const label = at('label');
  const val = at('validate');
  const errors = val?.gates.find((g) => g.gate === 'errors')?.figures ?? {};
  const drifts = (val?.gates ?? []).filter((g) => g.gate === 'drift').map((g) => f(g.figures.slope_meV_per_atom_per_ps, 3));
  const sim = at('simulate')?.figures?.conditions ?? {};
  console.log(
    `| ${r} | ${label?.figures?.accepted ?? '–'} (${label?.figures?.train_frames ?? '–'}/${label?.figures?.test_frames ?? '–'}) | ${f(errors.energy_rmse_meV_per_atom, 2)} | ${f(errors.force_rmse_meV_per_A)} | ${drifts.join(', ') || '–'} | ${conds.map((c) => f(sim[c]?.confident_fraction, 3)).join(' | ')} |`,
  );
}
if (!ended) console.log(`\n${run.stdout.split('\n').slice(-15).join('\n')}`);
if (keep) console.log(`\nkept: ${camp}`);
else rmSync(root, { recursive: true, force: true });
