#!/usr/bin/env node
/**
 * One measurement of the reader benchmark, in its own process so that its peak memory is its own:
 *   node bench/xyz-child.mjs CASE FILE
 * CASE: read-pos | read-committee | read-all | map2-pos | map2-committee | map1-committee | ranges2-pos | ranges2-committee
 * Prints one JSON line: { case, frames, wall_s, cpu_s (all threads), main_thread_cpu_s, max_rss_mb, stats }.
 */
import { readFileSync } from 'node:fs';
import { pathToFileURL } from 'node:url';

/** CPU seconds of the calling thread (Linux /proc/thread-self/stat utime + stime), or null elsewhere. */
function threadCpu() {
  try {
    const stat = readFileSync('/proc/thread-self/stat', 'utf8');
    const f = stat.slice(stat.lastIndexOf(')') + 2).split(' ');
    return (Number(f[11]) + Number(f[12])) / 100;
  } catch {
    return null;
  }
}

const [kind, file] = process.argv.slice(2);
const dist = new URL('../dist/atoms/xyz/', import.meta.url);
const { readFrames } = await import(new URL('reader.js', dist).href);
const mapModule = await import(new URL('map.js', dist).href);
const { mapFrames } = mapModule;
const committee = ['forces_0', 'forces_1', 'forces_2', 'forces_3'];
const job = (columns) => ({ module: pathToFileURL(new URL('./xyz-jobs.mjs', import.meta.url).pathname).href, fn: 'touch', columns });

const t0 = performance.now();
let frames = 0;
let stats = null;
async function read(columns) {
  for await (const f of readFrames(file, { columns })) {
    if (f.positions.length < 0) throw new Error('unreachable');
    frames++;
  }
}
switch (kind) {
  case 'read-pos': await read([]); break;
  case 'read-committee': await read(committee); break;
  case 'read-all': await read(undefined); break;
  case 'map2-pos': frames = (await mapFrames(file, job([]), { workers: 2 })).length; stats = mapModule.lastMapStats; break;
  case 'map2-committee': frames = (await mapFrames(file, job(committee), { workers: 2 })).length; stats = mapModule.lastMapStats; break;
  case 'map1-committee': frames = (await mapFrames(file, job(committee), { workers: 1 })).length; stats = mapModule.lastMapStats; break;
  // range-split mode (a job that does not use the frame index): each thread reads its own byte ranges
  case 'ranges2-pos': frames = (await mapFrames(file, { ...job([]), fn: 'touchNoIndex', usesIndex: false }, { workers: 2 })).length; stats = mapModule.lastMapStats; break;
  case 'ranges2-committee': frames = (await mapFrames(file, { ...job(committee), fn: 'touchNoIndex', usesIndex: false, positions: false }, { workers: 2 })).length; stats = mapModule.lastMapStats; break;
  default: throw new Error(`unknown case ${kind}`);
}
const wall = (performance.now() - t0) / 1000;
const ru = process.resourceUsage();
console.log(JSON.stringify({ case: kind, frames, wall_s: wall, cpu_s: (ru.userCPUTime + ru.systemCPUTime) / 1e6, main_thread_cpu_s: threadCpu(), max_rss_mb: ru.maxRSS / 1024, stats }));
