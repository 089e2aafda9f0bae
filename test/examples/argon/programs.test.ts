/**
 * The stage programs as the engine runs them: task.json + RATCHET_* environment, and by hand with flags.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { mkdir, readFile, writeFile } from 'node:fs/promises';
import { join, resolve } from 'node:path';
import type { Frame } from '../../../src/atoms/frame.js';
import { readFrames } from '../../../src/atoms/xyz/reader.js';
import { checkDrift, checkErrors } from '../../../src/gates/index.js';
import { writeFrames } from '../../../src/atoms/xyz/writer.js';
import { ljFccLatticeConstant } from '../../../examples/argon/lib/lattice.js';
import { argonLj, ljEnergyForces } from '../../../examples/argon/lib/lj.js';
import { rattledFcc, removeScratch, scratchDir } from './helpers.js';
import { resolveTask, type ProgramSpec } from '../../../examples/argon/lib/cli.js';

afterAll(removeScratch);

const ROOT = resolve(import.meta.dirname, '../../..');

function run(program: string, args: string[], env: Record<string, string> = {}) {
  const r = spawnSync(process.execPath, ['--import', 'tsx', join(ROOT, 'examples/argon', program), ...args], {
    cwd: ROOT,
    encoding: 'utf8',
    env: { ...process.env, ...env },
  });
  return { code: r.status, stdout: r.stdout, stderr: r.stderr };
}

async function frames(path: string): Promise<Frame[]> {
  const out: Frame[] = [];
  for await (const f of readFrames(path)) out.push(f);
  return out;
}

async function task(dir: string, body: object): Promise<string> {
  await mkdir(dir, { recursive: true });
  const path = join(dir, 'task.json');
  await writeFile(path, JSON.stringify(body, null, 2));
  return path;
}

let work: string;
let unlabeled: string;

beforeAll(async () => {
  work = await scratchDir('argon programs ');
  unlabeled = join(work, 'sample', 'frames.xyz');
  await mkdir(join(work, 'sample'), { recursive: true });
  const a = ljFccLatticeConstant(3.405);
  const fs = Array.from({ length: 10 }, (_, s) => rattledFcc(a, 2, 0.1, 0.02, 50 + s));
  fs.forEach((f, k) => {
    f.info.set('source_frame', k);
    f.arrays.set('forces_0', { type: 'R', width: 3, values: new Float64Array(96) }); // as if from an MD trajectory
  });
  await writeFrames(unlabeled, fs);
});

describe('argon stage programs', () => {
  it('label -> train x2 -> md -> validate (errors, nve) through task.json and RATCHET_* variables', async () => {
    // label: task.json names the input and output; the output path is relative to the task directory
    const labelDir = join(work, 'rounds/0/label/0000');
    const labelTask = await task(labelDir, { campaign: 'argon', round: 0, stage: 'label', task: 'r0/label/0000', seed: 1, inputs: { frames: unlabeled }, params: {}, outputs: { labeled: 'labeled.xyz' } });
    const lab = run('label.ts', [], { RATCHET_TASK_JSON: labelTask });
    expect(lab.stderr).toBe('');
    expect(lab.code).toBe(0);
    expect(lab.stdout).toMatch(/label: 10 frames/);
    const labeled = await frames(join(labelDir, 'labeled.xyz'));
    expect(labeled).toHaveLength(10);
    const ref = ljEnergyForces(labeled[3], argonLj());
    expect(labeled[3].info.get('energy')).toBeCloseTo(ref.energy, 10);
    expect(labeled[3].info.get('source_frame')).toBe(3); // lineage info kept
    expect(labeled[3].arrays.has('forces_0')).toBe(false); // model output dropped

    // train: two members, seeds from task.json, training set hash recorded
    const labeledPath = join(labelDir, 'labeled.xyz');
    const hash = createHash('sha256').update(await readFile(labeledPath)).digest('hex');
    const models: string[] = [];
    for (const m of [0, 1]) {
      const dir = join(work, `rounds/0/train/000${m}`);
      // member 1's task.json names the engine's artifact id of the training set; member 0's does not (file hash)
      const fake = 'ab'.repeat(32);
      const t = await task(dir, {
        round: 0, stage: 'train', task: `r0/train/000${m}`, seed: 10 + m,
        inputs: { training_set: labeledPath }, params: { basis_count: 10 }, outputs: { model: 'model.json' },
        ...(m === 1 ? { input_artifacts: { training_set: `sha256:${fake}` } } : {}),
      });
      const r = run('train.ts', [], { RATCHET_TASK_JSON: t });
      expect(r.stderr).toBe('');
      expect(r.code).toBe(0);
      const model = JSON.parse(await readFile(join(dir, 'model.json'), 'utf8'));
      expect(model.training.member).toBe(m);
      expect(model.training.seed).toBe(10 + m);
      expect(model.training.training_set_sha256).toBe(m === 1 ? fake : hash);
      expect(model.pair_weights['Ar-Ar']).toHaveLength(10);
      models.push(join(dir, 'model.json'));
    }

    // md: inputs model_0, model_1 and a start; output named by RATCHET_OUT_TRAJECTORY (env wins over task.json)
    const mdDir = join(work, 'rounds/0/simulate/cold');
    const t = await task(mdDir, {
      stage: 'simulate', task: 'r0/simulate/cold', seed: 7,
      inputs: { start: unlabeled, model_0: models[0], model_1: models[1] },
      params: { temperature: 40, steps: 60, write_every: 20, timestep: 5 }, // the campaign's condition keys
      outputs: { trajectory: 'ignored.xyz', summary: 'summary.json' },
    });
    const md = run('md.ts', [], { RATCHET_TASK_JSON: t, RATCHET_OUT_TRAJECTORY: join(mdDir, 'trajectory.xyz') });
    expect(md.stderr).toBe('');
    expect(md.code).toBe(0);
    const traj = await frames(join(mdDir, 'trajectory.xyz'));
    expect(traj.map((f) => f.info.get('step'))).toEqual([0, 20, 40, 60]);
    expect(traj[3].info.get('time')).toBe(300);
    for (const key of ['velocities', 'forces', 'forces_0', 'forces_1']) expect(traj[3].arrays.get(key)?.width).toBe(3);
    for (const key of ['energy', 'total_energy', 'temperature', 'energy_0', 'energy_1']) expect(typeof traj[3].info.get(key)).toBe('number');
    const summary = JSON.parse(await readFile(join(mdDir, 'summary.json'), 'utf8'));
    expect(summary.reason).toBe('completed');
    // driving force = committee mean
    const f = traj[2].arrays;
    const mean = ((f.get('forces_0')!.values as Float64Array)[5] + (f.get('forces_1')!.values as Float64Array)[5]) / 2;
    expect((f.get('forces')!.values as Float64Array)[5]).toBeCloseTo(mean, 12);

    // validate, kind errors, from the environment alone (no task.json): predictions on held-out frames
    const valDir = join(work, 'rounds/0/validate/errors');
    await mkdir(valDir, { recursive: true });
    const val = run('validate.ts', [], {
      RATCHET_PARAM_KIND: 'errors',
      RATCHET_IN_REFERENCE: labeledPath,
      RATCHET_IN_MODEL_0: models[0],
      RATCHET_IN_MODEL_1: models[1],
      RATCHET_OUT_PREDICTIONS: join(valDir, 'predictions.xyz'),
    });
    expect(val.stderr).toBe('');
    expect(val.code).toBe(0);
    const p = await frames(join(valDir, 'predictions.xyz'));
    expect(p).toHaveLength(10);
    expect(Array.from(p[4].positions)).toEqual(Array.from(labeled[4].positions));
    const e0 = p[4].info.get('energy_0') as number, e1 = p[4].info.get('energy_1') as number;
    expect(p[4].info.get('energy')).toBeCloseTo((e0 + e1) / 2, 12);
    const errors = await checkErrors(labeledPath, join(valDir, 'predictions.xyz'));
    expect(errors.figures.frames).toBe(10);

    // validate, kind nve, through task.json as the engine plans it: a constant-energy run the drift gate accepts
    const nveDir = join(work, 'rounds/0/validate/nve-cold');
    const nt = await task(nveDir, {
      stage: 'validate', task: 'r0/validate/nve-cold', seed: 3,
      inputs: { model_0: models[0], model_1: models[1], start: unlabeled },
      params: { kind: 'nve', condition: 'cold', temperature: 30, steps: 200, timestep: 5, write_every: 20, committee: 2, start_frame: 0 },
      outputs: { trajectory: 'trajectory.xyz' },
    });
    const nve = run('validate.ts', [], { RATCHET_TASK_JSON: nt });
    expect(nve.stderr).toBe('');
    expect(nve.code).toBe(0);
    expect(nve.stdout).toMatch(/^md: nve 30 K, 200 steps of 5 fs with 2 models: completed/);
    const drift = await checkDrift([join(nveDir, 'trajectory.xyz')], { workers: 1 });
    expect(drift.verdict).toBe('pass');
    expect(drift.figures.frames).toBe(11);
  });

  it('md stops early at a contact and still writes the trajectory', async () => {
    const model = join(work, 'rounds/0/train/0000/model.json');
    const out = join(work, 'contact.xyz');
    // nearest neighbours in the rattled crystal are ~3.4-3.9 Å: a 3.5 Å floor is violated at step 0
    const r = run('md.ts', ['--start', unlabeled, '--model', model, '--out', out, '--min-distance', '3.5', '--steps', '50', '--temperature', '40']);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/STOPPED at step 0 \(atoms closer than 3.5 Å\)/);
    const t = await frames(out);
    expect(t.at(-1)!.info.get('stopped')).toBe('contact');
  });

  it('refuses bad input with exit code 2 and a message naming what is wrong', async () => {
    const missing = run('label.ts', ['--out', join(work, 'x.xyz')]);
    expect(missing.code).toBe(2);
    expect(missing.stderr).toMatch(/missing input 'frames': give --in FILE, RATCHET_IN_FRAMES, or task.json inputs.frames/);

    // training on frames without reference labels: names the file and frame
    const unlabeledTrain = run('train.ts', ['--in', unlabeled, '--out', join(work, 'm.json')]);
    expect(unlabeledTrain.code).toBe(2);
    expect(unlabeledTrain.stderr).toMatch(/frames\.xyz: frame 0: expected a finite number in info key 'energy'/);
  });

  it('resolves the task contract: precedence flags > RATCHET_* > task.json > defaults, and clear errors', async () => {
    const spec: ProgramSpec = {
      name: 'demo',
      summary: '',
      inputs: [
        { name: 'frames', flag: 'in', help: '' },
        { name: 'models', aliases: ['committee'], pattern: /^model_\d+$/, flag: 'model', multiple: true, help: '' },
      ],
      outputs: [{ name: 'out', flag: 'out', help: '' }],
      params: [
        { name: 'steps', type: 'integer', default: 5, help: '' },
        { name: 'kind', type: 'string', default: 'a', choices: ['a', 'b'], help: '' },
        { name: 'bootstrap', type: 'boolean', default: true, help: '' },
        { name: 'timestep', aliases: ['dt'], type: 'number', default: 1, help: '' },
      ],
    };
    const dir = join(work, 'contract');
    const t = await task(dir, { seed: 3, inputs: { frames: '/abs/f.xyz', model_10: '/m10.json', model_2: '/m2.json' }, params: { steps: 7, dt: 2.5 }, outputs: { out: 'o.xyz' } });
    const r = await resolveTask(spec, ['--no-bootstrap'], { RATCHET_TASK_JSON: t, RATCHET_SEED: '9' });
    if (r === 'help') throw new Error('unexpected');
    expect(r.inputs.frames).toEqual(['/abs/f.xyz']);
    expect(r.inputs.models).toEqual(['/m2.json', '/m10.json']); // natural order of model_<m>
    expect(r.outputs.out).toBe(join(dir, 'o.xyz')); // relative to the task directory
    expect(r.params).toMatchObject({ steps: 7, kind: 'a', bootstrap: false, timestep: 2.5 }); // dt is an alias of timestep
    expect(r.seed).toBe(9); // RATCHET_SEED over task.json seed
    const flagged = await resolveTask(spec, ['--steps', '11', '--in', 'here.xyz'], { RATCHET_TASK_JSON: t, RATCHET_IN_FRAMES: '/env/f.xyz' });
    if (flagged === 'help') throw new Error('unexpected');
    expect(flagged.params.steps).toBe(11);
    expect(flagged.inputs.frames).toEqual([resolve('here.xyz')]);
    const env = await resolveTask(spec, [], { RATCHET_TASK_JSON: t, RATCHET_IN_FRAMES: '/env/f.xyz', RATCHET_PARAM_KIND: 'b' });
    if (env === 'help') throw new Error('unexpected');
    expect(env.inputs.frames).toEqual(['/env/f.xyz']);
    expect(env.params.kind).toBe('b');
    await expect(resolveTask(spec, [], { RATCHET_TASK_JSON: t, RATCHET_PARAM_KIND: 'z' })).rejects.toThrow(/RATCHET_PARAM_KIND: expected one of a, b, found "z"/);

    const bad = await task(join(work, 'contract-bad'), { inputs: { frames: '/f', models: '/m' }, params: { steps: 'many', kind: 'c' }, outputs: { out: 'o' } });
    await expect(resolveTask(spec, [], { RATCHET_TASK_JSON: bad })).rejects.toThrow(/task\.json: key params\.steps: expected a number, found "many"/);
    await expect(resolveTask(spec, ['--steps', '2.5'], { RATCHET_TASK_JSON: bad })).rejects.toThrow(/--steps: expected an integer, found "2.5"/);
    await expect(resolveTask(spec, ['--steps', '2', '--kind', 'c'], { RATCHET_TASK_JSON: bad })).rejects.toThrow(/--kind: expected one of a, b, found "c"/);
    await expect(resolveTask(spec, ['--frobnicate'], {})).rejects.toThrow(/Unknown option '--frobnicate'/);
    await expect(resolveTask(spec, ['--out', 'o'], {})).rejects.toThrow(/missing input 'frames'/);
    await expect(resolveTask(spec, [], { RATCHET_TASK_JSON: join(work, 'nope.json') })).rejects.toThrow(/nope\.json: cannot read task file \(ENOENT\)/);
  });
});
