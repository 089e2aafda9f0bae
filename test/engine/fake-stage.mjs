#!/usr/bin/env node
// Invented stage programs for the engine tests (no physics): each reads what ratchet gives it through
// RATCHET_* variables and writes valid extended XYZ (or a model file) deterministically, so two runs of
// the same campaign produce byte-identical outputs. Every run appends one line to <task dir>/runs.log,
// so a test can count how often a task ran. Flag files in the campaign dir make a task misbehave:
//   fail-<stage>-<task>       exit 3 (with a message on stderr) while the file exists
//   fail-once-<stage>-<task>  exit 3 and delete the flag (the next attempt succeeds)
//   nan-<stage>-<task>        write a non-finite energy into the first frame (label)
//   skip-<stage>-<task>       exit 0 without writing the output
//   contact-<stage>-<task>    two atoms 0.5 Å apart from frame 6 on (simulate)
//   sleep-<stage>             sleep that many seconds (file content) before working
import { appendFileSync, existsSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';

const env = process.env;
const mode = process.argv[2];
const dir = env.RATCHET_TASK_DIR;
const camp = env.RATCHET_CAMPAIGN_DIR;
const task = env.RATCHET_TASK.split('/').pop();
const stage = env.RATCHET_STAGE;
appendFileSync(join(dir, 'runs.log'), `${env.RATCHET_TASK} ${process.pid}\n`);

const flag = (name) => join(camp, `${name}-${stage}-${task}`);
if (existsSync(join(camp, `sleep-${stage}`))) {
  const s = Number(readFileSync(join(camp, `sleep-${stage}`), 'utf8'));
  await new Promise((r) => setTimeout(r, s * 1000));
}
if (existsSync(flag('fail'))) {
  process.stderr.write(`fake ${stage}: told to fail by ${flag('fail')}\n`);
  process.exit(3);
}
if (existsSync(flag('fail-once'))) {
  rmSync(flag('fail-once'));
  process.stderr.write(`fake ${stage}: failing once\n`);
  process.exit(3);
}
if (existsSync(flag('skip'))) process.exit(0);

/** Frames of an extended XYZ file: species, positions, lattice text. Reads only what ratchet's writer writes. */
function readXyz(path) {
  const lines = readFileSync(path, 'utf8').split('\n');
  const frames = [];
  let i = 0;
  while (i < lines.length && lines[i].trim() !== '') {
    const n = Number(lines[i].trim());
    const comment = lines[i + 1];
    const lattice = /Lattice="([^"]*)"/.exec(comment)?.[1];
    const species = [];
    const pos = [];
    for (let k = 0; k < n; k++) {
      const f = lines[i + 2 + k].trim().split(/\s+/);
      species.push(f[0]);
      pos.push([Number(f[1]), Number(f[2]), Number(f[3])]);
    }
    frames.push({ species, pos, lattice });
    i += n + 2;
  }
  return frames;
}

const num = (x) => x.toFixed(8);

function frameText(fr, extraProps, perAtom, info) {
  const props = ['species:S:1:pos:R:3', ...extraProps].join(':');
  const head = `Lattice="${fr.lattice}" Properties=${props} ${info} pbc="T T T"`;
  const body = fr.species.map((s, a) => [s, ...fr.pos[a].map(num), ...perAtom(a).map(num)].join(' '));
  return `${fr.species.length}\n${head}\n${body.join('\n')}\n`;
}

/** A made-up smooth "reference": energy and forces from the positions only. */
function labels(fr) {
  const c = [2.6, 2.6, 2.6];
  let e = -0.3 * fr.species.length;
  const f = fr.pos.map((p) => p.map((x, k) => -0.05 * (x - c[k])));
  for (const p of fr.pos) for (let k = 0; k < 3; k++) e += 0.025 * (p[k] - c[k]) ** 2;
  return { e, f };
}

const out = (name) => env[`RATCHET_OUT_${name}`];

if (mode === 'label') {
  const frames = readXyz(env.RATCHET_IN_FRAMES);
  let text = '';
  frames.forEach((fr, k) => {
    const { e, f } = labels(fr);
    const energy = k === 0 && existsSync(flag('nan')) ? 'NaN' : num(e);
    text += frameText(fr, ['forces:R:3'], (a) => f[a], `energy=${energy}`);
  });
  if (env.RATCHET_PARAM_ECHO !== undefined) writeFileSync(join(dir, 'echo.txt'), env.RATCHET_PARAM_ECHO);
  writeFileSync(out('LABELED'), text);
} else if (mode === 'train') {
  const data = readFileSync(env.RATCHET_IN_TRAINING_SET, 'utf8');
  const frames = readXyz(env.RATCHET_IN_TRAINING_SET).length;
  writeFileSync(out('MODEL'), JSON.stringify({ member: Number(env.RATCHET_PARAM_MEMBER), seed: Number(env.RATCHET_SEED), frames, bytes: data.length }) + '\n');
} else if (mode === 'validate') {
  if (env.RATCHET_PARAM_KIND === 'errors') {
    const frames = readXyz(env.RATCHET_IN_REFERENCE);
    let text = '';
    for (const fr of frames) {
      const { e, f } = labels(fr);
      text += frameText(fr, ['forces:R:3'], (a) => f[a].map((x) => x + 0.001), `energy=${num(e + 0.002)}`);
    }
    writeFileSync(out('PREDICTIONS'), text);
  } else {
    const [fr] = readXyz(env.RATCHET_IN_START);
    let text = '';
    for (let s = 0; s < 6; s++) {
      const moved = { ...fr, pos: fr.pos.map((p, a) => p.map((x, k) => x + 0.01 * Math.sin(s + a + k))) };
      text += frameText(moved, [], () => [], `energy=${num(-1.2)} total_energy=${num(-1.0 + 1e-9 * s)} time=${s * 10}`);
    }
    writeFileSync(out('TRAJECTORY'), text);
  }
} else if (mode === 'simulate') {
  const [fr] = readXyz(env.RATCHET_IN_START);
  const m = Number(env.RATCHET_PARAM_COMMITTEE);
  const round = Number(env.RATCHET_ROUND);
  // Committee spread 0.1 eV/Å (informative) in round 0, 0.01 (confident) afterwards.
  const delta = round === 0 ? 0.2 : 0.02;
  const temp = Number(env.RATCHET_PARAM_TEMPERATURE);
  let text = '';
  for (let s = 0; s < 10; s++) {
    const moved = { ...fr, pos: fr.pos.map((p, a) => p.map((x, k) => x + 1e-4 * temp * Math.cos(s * 1.3 + a + 2 * k))) };
    // contact-simulate-<task>: from frame 6 on, atom 1 sits 0.5 Å from atom 0 (a contact violation).
    if (s >= 6 && existsSync(flag('contact'))) moved.pos[1] = [moved.pos[0][0] + 0.5, moved.pos[0][1], moved.pos[0][2]];
    const props = Array.from({ length: m }, (_, j) => `forces_${j}:R:3`);
    text += frameText(moved, props, (a) => Array.from({ length: m }, (_, j) => [j * delta, 0, 0.001 * a]).flat(), `energy=${num(-1.2)} time=${s * 10}`);
  }
  writeFileSync(out('TRAJECTORY'), text);
} else {
  process.stderr.write(`fake-stage: unknown mode ${mode}\n`);
  process.exit(2);
}
