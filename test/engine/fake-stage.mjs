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
//   bad-validate-errors       predictions 1 eV/atom off the reference (the errors gate fails)
//   reverse-label-<task>      return the labeled frames in reverse order
//   shift-label-<task>        move atom 1 of the last frame by 0.1 Å along x before labeling it
//   drop-label-<task>         leave out the first frame
//   junk-label-<task>         keep the input's info keys and add keys no data set may carry (free_energy,
//                             virial, a user key; per-atom magmoms, charges, energies, forces_0)
//   stress-label-<task>       add a reference stress (info key stress, 9 numbers, eV/Å^3)
//   short-simulate-<task>     write only the first frame of the run (and exit 0)
//   short-validate-<task>     write only one frame of the constant-energy run (and exit 0)
//   cold-simulate-<task>      velocities for a temperature 30 % below the condition's
//   dropforce-simulate-<task> leave forces_1 out of frame 3
// Well behaved, MD programs follow RATCHET_PARAM_STEPS, _WRITE_EVERY and _TIMESTEP: simulate writes steps
// W, 2W ... S (no step-0 frame, which ratchet accepts), validate's constant-energy run steps 0, W ... S,
// each frame with info step and time (fs); simulate writes velocities at the condition's temperature
// (exactly, over 3N - 3 degrees of freedom) and, for a pressure condition, a stress that with the kinetic
// part gives the condition's pressure.
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
    frames.push({ species, pos, lattice, comment });
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

/** Steps, write interval and time step an MD task was given; frames after step 0 it should write. */
function mdAsk() {
  const S = Number(env.RATCHET_PARAM_STEPS);
  const W = Number(env.RATCHET_PARAM_WRITE_EVERY ?? 10);
  const dt = Number(env.RATCHET_PARAM_TIMESTEP ?? 1);
  return { S, W, dt, written: Math.floor(S / W) };
}

// Argon (the only species the engine tests use): mass in u, and u Å^2/fs^2 -> eV, k_B in eV/K (CODATA 2018).
const MASS = 39.95;
const U_A2_FS2_EV = 103.642697;
const KB = 8.617333262e-5;

/** Per-atom velocities (Å/fs) with zero total momentum whose kinetic temperature over 3N - 3 is exactly T. */
function velocitiesAt(n, T, s) {
  const v = Array.from({ length: n }, (_, a) => [0, 1, 2].map((c) => Math.sin(1.7 * s + 2.1 * a + 0.9 * c + 0.3)));
  for (let c = 0; c < 3; c++) {
    const mean = v.reduce((x, r) => x + r[c], 0) / n;
    for (const r of v) r[c] -= mean;
  }
  const kin = 0.5 * MASS * U_A2_FS2_EV * v.flat().reduce((x, y) => x + y * y, 0);
  const f = Math.sqrt((0.5 * (3 * n - 3) * KB * T) / kin);
  return v.map((r) => r.map((x) => x * f));
}

/** A stress (9 numbers, eV/Å^3) whose pressure -trace/3 plus the kinetic part 2K/3V is P bar. */
function stressFor(P, v, lattice) {
  const l = lattice.split(/\s+/).map(Number);
  const V = Math.abs(l[0] * (l[4] * l[8] - l[5] * l[7]) - l[1] * (l[3] * l[8] - l[5] * l[6]) + l[2] * (l[3] * l[7] - l[4] * l[6]));
  const kin = 0.5 * MASS * U_A2_FS2_EV * v.flat().reduce((x, y) => x + y * y, 0);
  const p = P * 1e5 * 1e-30 / 1.602176634e-19 - (2 * kin) / (3 * V);
  return [-p, 0, 0, 0, -p, 0, 0, 0, -p];
}

if (mode === 'label') {
  const frames = readXyz(env.RATCHET_IN_FRAMES);
  let text = '';
  const junk = existsSync(flag('junk'));
  const stress = existsSync(flag('stress'));
  if (existsSync(flag('shift')) && frames.length) {
    const last = frames[frames.length - 1];
    last.pos = last.pos.map((p, a) => (a === 1 ? [p[0] + 0.1, p[1], p[2]] : p));
  }
  if (existsSync(flag('reverse'))) frames.reverse();
  if (existsSync(flag('drop'))) frames.shift();
  frames.forEach((fr, k) => {
    const { e, f } = labels(fr);
    const energy = k === 0 && existsSync(flag('nan')) ? 'NaN' : num(e);
    let info = `energy=${energy}`;
    if (stress) info += ` stress="${[0.01, 0.002, 0, 0.002, 0.02, 0, 0, 0, 0.03].map(num).join(' ')}"`;
    if (junk) {
      const kept = fr.comment.replace(/Lattice="[^"]*"|Properties=\S+|pbc="[^"]*"/g, ' ').trim();
      info += ` ${kept} free_energy=${num(e - 0.01)} virial="1 0 0 0 1 0 0 0 1" my_note=hello`;
      const extra = ['magmoms:R:1', 'charges:R:1', 'energies:R:1', 'forces_0:R:3'];
      text += frameText(fr, ['forces:R:3', ...extra], (a) => [...f[a], 0.5, -0.1 * a, e / fr.species.length, ...f[a].map((x) => x + 0.3)], info);
      return;
    }
    text += frameText(fr, ['forces:R:3'], (a) => f[a], info);
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
      // bad-validate-errors: predictions 1 eV/atom off (the errors gate fails; a weak first committee).
      const off = existsSync(flag('bad')) ? fr.species.length : 0.002;
      text += frameText(fr, ['forces:R:3'], (a) => f[a].map((x) => x + 0.001), `energy=${num(e + off)}`);
    }
    writeFileSync(out('PREDICTIONS'), text);
  } else {
    const [fr] = readXyz(env.RATCHET_IN_START);
    const { W, dt, written } = mdAsk();
    let text = '';
    // short-validate-<task>: one frame only.
    const last = existsSync(flag('short')) ? 0 : written;
    for (let s = 0; s <= last; s++) {
      const moved = { ...fr, pos: fr.pos.map((p, a) => p.map((x, k) => x + 0.01 * Math.sin(s + a + k))) };
      text += frameText(moved, [], () => [], `energy=${num(-1.2)} total_energy=${num(-1.0 + 1e-9 * s)} step=${s * W} time=${s * W * dt}`);
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
  const { W, dt, written } = mdAsk();
  // cold-simulate-<task>: velocities for 70 % of the condition's temperature.
  const vT = existsSync(flag('cold')) ? 0.7 * temp : temp;
  const pressure = env.RATCHET_PARAM_PRESSURE === undefined ? undefined : Number(env.RATCHET_PARAM_PRESSURE);
  let text = '';
  // short-simulate-<task>: the first frame only.
  const frames = existsSync(flag('short')) ? Math.min(1, written) : written;
  for (let s = 0; s < frames; s++) {
    const step = (s + 1) * W;
    const moved = { ...fr, pos: fr.pos.map((p, a) => p.map((x, k) => x + 1e-4 * temp * Math.cos(s * 1.3 + a + 2 * k))) };
    // contact-simulate-<task>: from frame 6 on, atom 1 sits 0.5 Å from atom 0 (a contact violation).
    if (s >= 6 && existsSync(flag('contact'))) moved.pos[1] = [moved.pos[0][0] + 0.5, moved.pos[0][1], moved.pos[0][2]];
    // dropforce-simulate-<task>: frame 3 has forces_0 only.
    const members = s === 3 && existsSync(flag('dropforce')) ? 1 : m;
    const props = ['velocities:R:3', ...Array.from({ length: members }, (_, j) => `forces_${j}:R:3`)];
    const v = velocitiesAt(fr.species.length, vT, s);
    let info = `energy=${num(-1.2)} step=${step} time=${step * dt}`;
    if (pressure !== undefined) info += ` stress="${stressFor(pressure, v, fr.lattice).map((x) => x.toExponential(10)).join(' ')}"`;
    text += frameText(moved, props, (a) => [...v[a], ...Array.from({ length: members }, (_, j) => [j * delta, 0, 0.001 * a]).flat()], info);
  }
  writeFileSync(out('TRAJECTORY'), text);
} else {
  process.stderr.write(`fake-stage: unknown mode ${mode}\n`);
  process.exit(2);
}
