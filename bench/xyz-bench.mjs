#!/usr/bin/env node
/**
 * Extended XYZ reader benchmark: throughput against `wc -l` on the same file in the same run, and peak memory.
 *
 *   npm run build && node bench/xyz-bench.mjs [--mb 320] [--repeat 3] [--keep]
 *
 * Generates bench/out/xyz-trajectory.xyz (bench/gen-trajectory.mjs: 1000-atom periodic frames with forces and
 * four committee force arrays) and a smaller one (1/4 of the size) to show that peak memory does not grow with
 * the file; times `wc -l`, readFrames (positions only; committee columns; all columns), mapFrames on 1 and
 * 2 workers, and, when the built CLI has them, `ratchet check contacts` and `ratchet check committee` with and
 * without the WebAssembly kernels (RATCHET_KERNELS=off), in rounds interleaved with `wc -l`.
 * Each measurement runs in its own process (peak RSS from process.resourceUsage(), or /usr/bin/time for the
 * CLI); the median of --repeat runs is reported. Writes bench/out/xyz-bench.json and prints a markdown table.
 * The big files are deleted at the end unless --keep.
 */
import { execFileSync, spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { cpus, loadavg } from 'node:os';
import { fileURLToPath } from 'node:url';

const root = fileURLToPath(new URL('..', import.meta.url));
const out = `${root}bench/out`;
const args = process.argv.slice(2);
const opt = (name, dflt) => {
  const i = args.indexOf(`--${name}`);
  return i >= 0 ? Number(args[i + 1]) : dflt;
};
const mb = opt('mb', 320);
const repeat = opt('repeat', 3);
const keep = args.includes('--keep');
if (!existsSync(`${root}dist/atoms/xyz/map.js`) || !existsSync(`${root}kernels/build/xyz-lines.wasm`)) {
  console.error('build first: npm run build');
  process.exit(2);
}
mkdirSync(out, { recursive: true });

const big = `${out}/xyz-trajectory.xyz`;
const small = `${out}/xyz-trajectory-quarter.xyz`;
for (const [path, size] of [[big, mb], [small, mb / 4]]) {
  if (!existsSync(path) || statSync(path).size < size * 1e6 * 0.99) {
    console.error(`generating ${path} (${size} MB)`);
    execFileSync(process.execPath, [`${root}bench/gen-trajectory.mjs`, path, '--mb', String(size)], { stdio: ['ignore', 'ignore', 'inherit'] });
  }
}

const median = (xs) => [...xs].sort((a, b) => a - b)[Math.floor(xs.length / 2)];
const hasTime = existsSync('/usr/bin/time');

/** Run a command `times` times; wall time measured here, peak RSS from /usr/bin/time when present. */
function timeCommand(cmd, argv, env = {}, times = repeat) {
  const walls = [];
  const rss = [];
  const cpu = [];
  let stdout = '';
  for (let k = 0; k < times; k++) {
    const t0 = performance.now();
    const options = { encoding: 'utf8', maxBuffer: 1 << 28, env: { ...process.env, ...env } };
    const r = hasTime ? spawnSync('/usr/bin/time', ['-f', '%M %U %S', cmd, ...argv], options) : spawnSync(cmd, argv, options);
    walls.push((performance.now() - t0) / 1000);
    if (hasTime) {
      const [m, u, sy] = r.stderr.trim().split('\n').pop().split(' ').map(Number);
      rss.push(m / 1024);
      cpu.push(u + sy);
    }
    stdout = r.stdout;
    if (r.status !== 0 && r.status !== 1) throw new Error(`${cmd} ${argv.join(' ')} failed (${r.status}): ${r.stderr}`);
  }
  return { wall_s: median(walls), walls, cpu_s: cpu.length ? median(cpu) : null, max_rss_mb: rss.length ? Math.max(...rss) : null, stdout };
}

function child(kind, file) {
  const runs = [];
  for (let k = 0; k < repeat; k++) {
    const r = spawnSync(process.execPath, [`${root}bench/xyz-child.mjs`, kind, file], { encoding: 'utf8' });
    if (r.status !== 0) throw new Error(`${kind}: ${r.stderr}`);
    runs.push(JSON.parse(r.stdout));
  }
  const wall = median(runs.map((r) => r.wall_s));
  return { ...runs.find((r) => r.wall_s === wall), walls: runs.map((r) => r.wall_s), max_rss_mb: Math.max(...runs.map((r) => r.max_rss_mb)) };
}

const bytes = statSync(big).size;
const MB = bytes / 1e6;
execFileSync('cat', [big], { stdio: ['ignore', 'ignore', 'inherit'], maxBuffer: 0 }); // warm the page cache
const wc = timeCommand('wc', ['-l', big]);
const wcRate = MB / wc.wall_s;
const rows = [{ what: '`wc -l`', command: `wc -l ${big}`, ...wc, rate: wcRate }];

const cases = [
  ['read-pos', 'readFrames, positions only (columns: [])'],
  ['read-committee', 'readFrames, forces_0..3'],
  ['read-all', 'readFrames, all columns'],
  ['map1-committee', 'mapFrames, 1 thread, forces_0..3'],
  ['map2-pos', 'mapFrames, workers: 2 (caller + 1 worker thread), positions only'],
  ['map2-committee', 'mapFrames, workers: 2 (caller + 1 worker thread), forces_0..3'],
  ['ranges2-pos', 'mapFrames, workers: 2, range-split (usesIndex: false), positions only'],
  ['ranges2-committee', 'mapFrames, workers: 2, range-split (usesIndex: false), forces_0..3, positions: false'],
];
for (const [kind, what] of cases) {
  const r = child(kind, big);
  rows.push({ what, command: `node bench/xyz-child.mjs ${kind} ${big}`, ...r, rate: MB / r.wall_s });
}
const smallMap = child('map2-committee', small);

const cli = `${root}dist/cli/index.js`;
const help = existsSync(cli) ? spawnSync(process.execPath, [cli, 'check', '--help'], { encoding: 'utf8' }).stdout : '';
// The commands, interleaved with `wc -l` round by round (this VM's speed drifts over minutes): each round runs
// wc -l, then every command once. RATCHET_KERNELS=off runs the same commands on the TypeScript code only.
const commands = [];
for (const gate of ['contacts', 'committee']) {
  if (!new RegExp(`\\b${gate}\\b`).test(help)) continue;
  commands.push({ what: `\`ratchet check ${gate}\``, argv: [cli, 'check', gate, big, '--json'], env: {} });
  commands.push({ what: `\`ratchet check ${gate}\`, RATCHET_KERNELS=off`, argv: [cli, 'check', gate, big, '--json'], env: { RATCHET_KERNELS: 'off' } });
}
const cmdRows = [];
const wcRounds = [];
const samples = commands.map(() => []);
for (let k = 0; k < repeat; k++) {
  wcRounds.push(timeCommand('wc', ['-l', big], {}, 1));
  commands.forEach((c, i) => samples[i].push(timeCommand(process.execPath, c.argv, c.env, 1)));
}
const wcInterleaved = { walls: wcRounds.flatMap((r) => r.walls) };
wcInterleaved.wall_s = median(wcInterleaved.walls);
commands.forEach((c, i) => {
  const walls = samples[i].flatMap((r) => r.walls);
  const wall = median(walls);
  const stdout = samples[i][0].stdout;
  cmdRows.push({
    what: c.what,
    command: `${Object.entries(c.env).map(([k, v]) => `${k}=${v} `).join('')}node dist/cli/index.js ${c.argv.slice(1).join(' ').replace(cli, '')}`,
    wall_s: wall,
    walls,
    cpu_s: median(samples[i].map((r) => r.cpu_s)),
    max_rss_mb: Math.max(...samples[i].map((r) => r.max_rss_mb ?? 0)),
    rate: MB / wall,
    verdict: (() => { try { return JSON.parse(stdout).verdict; } catch { return undefined; } })(),
  });
});

const result = {
  date: new Date().toISOString(),
  node: process.version,
  cpus: cpus().length,
  cpu: cpus()[0]?.model,
  loadavg_at_end: loadavg(),
  file: big,
  bytes,
  frames: rows.find((r) => r.frames)?.frames,
  repeat,
  rows: rows.map(({ stdout, ...r }) => ({ ...r, ratio_to_wc: r.rate ? r.rate / wcRate : null })),
  commands: { wc_walls: wcInterleaved.walls, wc_wall_s: wcInterleaved.wall_s, rows: cmdRows.map((r) => ({ ...r, ratio_to_wc: (MB / wcInterleaved.wall_s) ? r.rate / (MB / wcInterleaved.wall_s) : null })) },
  memory_scaling: { quarter_file_bytes: statSync(small).size, map2_committee_max_rss_mb: smallMap.max_rss_mb, full_file_max_rss_mb: rows.find((r) => r.case === 'map2-committee')?.max_rss_mb },
};
writeFileSync(`${out}/xyz-bench.json`, JSON.stringify(result, null, 2));
const f = (x, d = 2) => (x === null || x === undefined ? '—' : x.toFixed(d));
console.log(`file: ${big} (${f(MB, 1)} MB, ${result.frames} frames), node ${process.version}, ${result.cpus} cpus, load ${loadavg().map((x) => x.toFixed(1)).join(' ')}`);
const wcBest = Math.min(...wc.walls);
console.log('| what | wall s (median) | MB/s | ratio to wc -l | best wall s | best ratio (best/best) | CPU s (all threads) | peak RSS MB |');
console.log('|---|---|---|---|---|---|---|---|');
for (const r of result.rows) {
  const best = r.walls ? Math.min(...r.walls) : null;
  const pct = (x) => (x === null || x === undefined ? '—' : `${(100 * x).toFixed(1)}%`);
  console.log(`| ${r.what} | ${f(r.wall_s, 3)} | ${f(r.rate, 0)} | ${pct(r.ratio_to_wc)} | ${f(best, 3)} | ${pct(best ? wcBest / best : null)} | ${f(r.cpu_s, 2)} | ${f(r.max_rss_mb, 0)} |`);
}
if (cmdRows.length) {
  const wcBestI = Math.min(...wcInterleaved.walls);
  console.log(`\ncommands, interleaved with wc -l (${repeat} rounds; wc -l median ${f(wcInterleaved.wall_s, 3)} s, runs ${wcInterleaved.walls.map((x) => x.toFixed(3)).join(' ')})`);
  console.log('| what | wall s (median) | MB/s | ratio to wc -l | best wall s | best ratio (best/best) | CPU s (all threads) | peak RSS MB | every run, s |');
  console.log('|---|---|---|---|---|---|---|---|---|');
  for (const r of result.commands.rows) {
    const best = Math.min(...r.walls);
    console.log(`| ${r.what} | ${f(r.wall_s, 3)} | ${f(r.rate, 0)} | ${(100 * r.ratio_to_wc).toFixed(1)}% | ${f(best, 3)} | ${(100 * wcBestI / best).toFixed(1)}% | ${f(r.cpu_s, 2)} | ${f(r.max_rss_mb, 0)} | ${r.walls.map((x) => x.toFixed(2)).join(' ')} |`);
  }
}
console.log(`peak RSS of mapFrames (2 workers) on a quarter of the file: ${f(smallMap.max_rss_mb, 0)} MB (full file: ${f(result.memory_scaling.full_file_max_rss_mb, 0)} MB)`);
if (!keep) {
  rmSync(big, { force: true });
  rmSync(small, { force: true });
}
