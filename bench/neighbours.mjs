#!/usr/bin/env node
/**
 * Neighbour-search scaling benchmark: wall-clock time per atom of one forEachPair call (grid build + pair loop)
 * for one frame of 10^3 .. 10^6 atoms at liquid-like density, with a cutoff of 5-6 Å (common practice for
 * machine-learned potentials). Positions are random but non-overlapping (random sequential addition with a
 * 1.5 Å hard core, generated in fractional coordinates of a cube), and listed in insertion order (spatially random,
 * the unfavourable case for memory locality). Cells: periodic cube, and a triclinic cell (70°, 80°, 60°) of the same
 * volume holding the same fractional coordinates (distances are strained by the shear; still no overlaps).
 *
 *   npm run build && node bench/neighbours.mjs
 *   node --import tsx bench/neighbours.mjs --src            (straight from src/, no build)
 *   options: --sizes 1000,10000,100000,1000000 --density 0.1 --cutoff 6 --repeat 3 --seconds 1
 *
 * All systems are built first and then timed round-robin for --repeat rounds (so a change of machine load hits every
 * size alike). In a round, each system's forEachPair is called until it has used --seconds of CPU (at least one call),
 * so small systems are timed over many calls. Figures are CPU time (user + system of this process, meaningful on a
 * shared machine) per call: the median over rounds, and the best round. Wall-clock time is printed beside it.
 */
import { existsSync } from 'node:fs';
import { cpus, loadavg } from 'node:os';

const args = process.argv.slice(2);
const opt = (name, dflt) => {
  const i = args.indexOf(`--${name}`);
  return i >= 0 ? args[i + 1] : dflt;
};
const SIZES = String(opt('sizes', '1000,10000,100000,1000000')).split(',').map(Number);
const DENSITY = Number(opt('density', 0.1));
const CUTOFF = Number(opt('cutoff', 6));
const REPEAT = Number(opt('repeat', 3));
const SECONDS = Number(opt('seconds', 1));
const useSrc = args.includes('--src') || !existsSync(new URL('../dist/atoms/neighbours.js', import.meta.url));
const base = useSrc ? '../src/' : '../dist/';
const ext = useSrc ? '.ts' : '.js';
const { forEachPair } = await import(`${base}atoms/neighbours${ext}`);
const { cellFromParameters, cellVolume } = await import(`${base}atoms/cell${ext}`);

/** mulberry32 PRNG. */
function rng(seed) {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

/** Random sequential addition of n points with hard-core distance dmin in a periodic cube of side L; fractional coordinates. */
function randomNonOverlapping(n, L, dmin, seed) {
  const r = rng(seed);
  const g = Math.max(1, Math.floor(L / dmin));
  const cellSize = L / g;
  const head = new Int32Array(g * g * g).fill(-1);
  const next = new Int32Array(n);
  const pos = new Float64Array(3 * n);
  const d2min = dmin * dmin;
  let placed = 0;
  let attempts = 0;
  while (placed < n) {
    if (++attempts > 100 * n) throw new Error('random sequential addition is jammed: lower the density');
    const x = r() * L, y = r() * L, z = r() * L;
    const cx = Math.min(g - 1, Math.floor(x / cellSize)), cy = Math.min(g - 1, Math.floor(y / cellSize)), cz = Math.min(g - 1, Math.floor(z / cellSize));
    let ok = true;
    for (let a = -1; a <= 1 && ok; a++)
      for (let b = -1; b <= 1 && ok; b++)
        for (let c = -1; c <= 1 && ok; c++) {
          const ix = (cx + a + g) % g, iy = (cy + b + g) % g, iz = (cz + c + g) % g;
          for (let k = head[(ix * g + iy) * g + iz]; k >= 0; k = next[k]) {
            let dx = pos[3 * k] - x, dy = pos[3 * k + 1] - y, dz = pos[3 * k + 2] - z;
            dx -= L * Math.round(dx / L); dy -= L * Math.round(dy / L); dz -= L * Math.round(dz / L);
            if (dx * dx + dy * dy + dz * dz < d2min) { ok = false; break; }
          }
        }
    if (!ok) continue;
    pos[3 * placed] = x; pos[3 * placed + 1] = y; pos[3 * placed + 2] = z;
    const cell = (cx * g + cy) * g + cz;
    next[placed] = head[cell];
    head[cell] = placed;
    placed++;
  }
  for (let k = 0; k < 3 * n; k++) pos[k] /= L;
  return pos;
}

function toCartesian(frac, h) {
  const out = new Float64Array(frac.length);
  for (let i = 0; i < frac.length; i += 3) {
    const a = frac[i], b = frac[i + 1], c = frac[i + 2];
    out[i] = a * h[0] + b * h[3] + c * h[6];
    out[i + 1] = a * h[1] + b * h[4] + c * h[7];
    out[i + 2] = a * h[2] + b * h[5] + c * h[8];
  }
  return out;
}

/** CPU time (user + system) of this process in ms: robust on a shared machine where wall-clock time includes waiting. */
function cpuMs() {
  const u = process.cpuUsage();
  return (u.user + u.system) / 1000;
}

function timeCall(system) {
  let pairs = 0, sum = 0;
  forEachPair(system, CUTOFF, (_i, _j, d) => {
    pairs++;
    sum += d;
  });
  return { pairs, sum };
}

function median(xs) {
  const s = [...xs].sort((a, b) => a - b);
  return s[Math.floor(s.length / 2)];
}

const pbc = [true, true, true];
const rows = [];
console.log(`neighbour search: density ${DENSITY} atoms/Å³, cutoff ${CUTOFF} Å, ${useSrc ? 'src via tsx' : 'dist'}, node ${process.version}, ${cpus().length} cores (${cpus()[0]?.model ?? '?'}), load ${loadavg().map((x) => x.toFixed(2)).join(' ')}`);
// warm-up so the first row is not charged for compilation
{
  const L = Math.cbrt(3000 / DENSITY);
  const sys = { positions: toCartesian(randomNonOverlapping(3000, L, 1.5, 99), [L, 0, 0, 0, L, 0, 0, 0, L]), cell: Float64Array.of(L, 0, 0, 0, L, 0, 0, 0, L), pbc };
  for (let k = 0; k < 30; k++) timeCall(sys);
}
// Build every system first, then time them round-robin (--repeat rounds), so that changes in machine load hit all sizes
// alike; each figure is the median (and best) over rounds of the CPU time per call.
const systems = [];
for (const n of SIZES) {
  const L = Math.cbrt(n / DENSITY);
  const tg = performance.now();
  const frac = randomNonOverlapping(n, L, 1.5, 1234 + n);
  const genMs = performance.now() - tg;
  const cube = Float64Array.of(L, 0, 0, 0, L, 0, 0, 0, L);
  const tri0 = cellFromParameters(1, 1, 1, 70, 80, 60);
  const s = Math.cbrt((L * L * L) / cellVolume(tri0));
  const tri = tri0.map((x) => x * s);
  for (const [shape, cell] of [['cubic', cube], ['triclinic', tri]]) {
    systems.push({ n, shape, genMs, system: { positions: toCartesian(frac, cell), cell, pbc }, cpu: [], wall: [], pairs: 0 });
  }
}
for (let rep = 0; rep < REPEAT; rep++) {
  for (const row of systems) {
    const c0 = cpuMs(), t0 = performance.now();
    let calls = 0;
    do {
      row.pairs = timeCall(row.system).pairs;
      calls++;
    } while (cpuMs() - c0 < SECONDS * 1000);
    row.cpu.push((cpuMs() - c0) / calls);
    row.wall.push((performance.now() - t0) / calls);
  }
}
for (const row of systems) {
  const { n, shape, genMs, pairs } = row;
  const ms = median(row.cpu);
  const best = Math.min(...row.cpu);
  const wall = median(row.wall);
  rows.push({ n, shape, ms, best, wall, usPerAtom: (1000 * ms) / n, bestUsPerAtom: (1000 * best) / n, pairsPerAtom: pairs / n, nsPerPair: (1e6 * ms) / pairs, genMs });
  const last = rows[rows.length - 1];
  console.log(
    `${String(n).padStart(8)} ${shape.padEnd(9)} ${ms.toFixed(2).padStart(10)} ms CPU/frame ${last.usPerAtom.toFixed(3).padStart(7)} µs/atom (best ${last.bestUsPerAtom.toFixed(3)}) ` +
      `${last.pairsPerAtom.toFixed(1).padStart(6)} pairs/atom ${last.nsPerPair.toFixed(1).padStart(6)} ns/pair  (wall ${wall.toFixed(2)} ms/frame; positions generated in ${genMs.toFixed(0)} ms)`,
  );
}
for (const shape of ['cubic', 'triclinic']) {
  const r = rows.filter((x) => x.shape === shape);
  if (r.length < 2) continue;
  const per = r.map((x) => x.usPerAtom);
  const bestPer = r.map((x) => x.bestUsPerAtom);
  console.log(
    `${shape}: per-atom CPU time, largest / smallest system = ${(per[per.length - 1] / per[0]).toFixed(2)}x median, ` +
      `${(bestPer[bestPer.length - 1] / bestPer[0]).toFixed(2)}x best; max / min over all sizes = ${(Math.max(...per) / Math.min(...per)).toFixed(2)}x median, ` +
      `${(Math.max(...bestPer) / Math.min(...bestPer)).toFixed(2)}x best (target <= 1.5x)`,
  );
}
