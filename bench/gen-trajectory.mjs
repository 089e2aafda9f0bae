#!/usr/bin/env node
/**
 * Writes a demo extended XYZ trajectory for the reader benchmark (invented data, not physics):
 * frames of a periodic 10x10x10 simple-cubic box of atoms (3.0 Å spacing, 30 Å cell, species Si and O),
 * each atom displaced from its site by at most 0.4 Å per axis so that no two atoms come closer than 2.2 Å;
 * per-atom `forces` and four committee arrays `forces_0`..`forces_3` (forces plus small noise);
 * per-frame `energy`, `time`, `step`. Numbers use ASE's own column format ("%16.8f"), what a trajectory
 * written through ASE looks like.
 *
 *   node bench/gen-trajectory.mjs OUT.xyz [--mb 320] [--frames N] [--atoms-per-side 10] [--seed 1]
 *
 * Stops at N frames, or when the file reaches --mb megabytes (10^6 bytes), whichever comes first.
 */
import { createWriteStream } from 'node:fs';
import { once } from 'node:events';

const args = process.argv.slice(2);
const out = args.find((a) => !a.startsWith('--') && !/^\d/.test(a));
if (!out) {
  console.error('usage: node bench/gen-trajectory.mjs OUT.xyz [--mb 320] [--frames N] [--atoms-per-side 10] [--seed 1]');
  process.exit(2);
}
const opt = (name, dflt) => {
  const i = args.indexOf(`--${name}`);
  return i >= 0 ? Number(args[i + 1]) : dflt;
};
const targetBytes = opt('mb', 320) * 1e6;
const maxFrames = opt('frames', Infinity);
const side = opt('atoms-per-side', 10);
let seed = opt('seed', 1) >>> 0;

// mulberry32: a small seeded generator, so runs are reproducible.
function rand() {
  seed = (seed + 0x6d2b79f5) >>> 0;
  let t = seed;
  t = Math.imul(t ^ (t >>> 15), t | 1);
  t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
  return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
}
function gauss() {
  const u = 1 - rand();
  const v = rand();
  return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * v);
}
const f = (x) => x.toFixed(8).padStart(16);

const spacing = 3.0;
const L = side * spacing;
const n = side ** 3;
const species = Array.from({ length: n }, (_, a) => (a % 3 === 0 ? 'Si' : 'O '));
const stream = createWriteStream(out, { highWaterMark: 1 << 22 });
let bytes = 0;
let frame = 0;
const comps = ['forces', 'forces_0', 'forces_1', 'forces_2', 'forces_3'];
const props = `species:S:1:pos:R:3:${comps.map((c) => `${c}:R:3`).join(':')}`;
while (bytes < targetBytes && frame < maxFrames) {
  const lines = [`${n}`, `Lattice="${L} 0.0 0.0 0.0 ${L} 0.0 0.0 0.0 ${L}" Properties=${props} energy=${(-4.2 * n + gauss()).toFixed(8)} time=${(frame * 2).toFixed(1)} step=${frame} pbc="T T T"`];
  let a = 0;
  for (let i = 0; i < side; i++)
    for (let j = 0; j < side; j++)
      for (let k = 0; k < side; k++, a++) {
        const d = () => Math.max(-0.4, Math.min(0.4, 0.08 * gauss()));
        const x = i * spacing + d();
        const y = j * spacing + d();
        const z = k * spacing + d();
        const F = [gauss(), gauss(), gauss()];
        let line = `${species[a]} ${f(x)} ${f(y)} ${f(z)} ${f(F[0])} ${f(F[1])} ${f(F[2])}`;
        for (let m = 0; m < 4; m++) line += ` ${f(F[0] + 0.05 * gauss())} ${f(F[1] + 0.05 * gauss())} ${f(F[2] + 0.05 * gauss())}`;
        lines.push(line);
      }
  const text = lines.join('\n') + '\n';
  bytes += Buffer.byteLength(text);
  if (!stream.write(text)) await once(stream, 'drain');
  frame++;
}
stream.end();
await once(stream, 'finish');
console.log(JSON.stringify({ file: out, frames: frame, atoms: n, bytes }));
