/**
 * Trainer of the argon demo: fits one committee member, a linear pair model on a Gaussian radial
 * basis with a 6 Å smooth cutoff (shorter than the reference's 10.2 Å), to energies and forces by
 * ridge regression, with a member-specific seed for the bootstrap resample of frames, the random
 * anchor and the jitter of the basis. Writes the model as JSON.
 *
 *   npx tsx examples/argon/train.ts --in labeled.xyz --out model.json --seed 3
 * or, run by the engine, with RATCHET_TASK_JSON (inputs.training_set -> outputs.model, seed).
 */
import { basename } from 'node:path';
import { bool, num, optNum, runProgram, type ProgramSpec } from './lib/cli.js';
import { gaussianBasis } from './lib/basis.js';
import { fitModel } from './lib/fit.js';
import { labeledConfig, readAll } from './lib/frames.js';
import { sha256File } from './lib/hash.js';
import { saveModel } from './lib/model.js';

const spec: ProgramSpec = {
  name: 'train',
  summary: 'fit one committee member (linear pair model, ridge regression on energies and forces)',
  inputs: [
    {
      name: 'training_set',
      aliases: ['frames', 'labeled', 'train', 'training'],
      pattern: /^(training_set|labeled)_\d+$/,
      flag: 'in',
      multiple: true,
      help: 'labeled extended XYZ (info energy, per-atom forces); several files are concatenated',
    },
  ],
  outputs: [{ name: 'model', flag: 'out', help: 'model JSON' }],
  params: [
    { name: 'member', type: 'integer', help: 'committee member index (recorded in the model)' },
    { name: 'bootstrap', type: 'boolean', default: true, help: 'resample frames with replacement (--no-bootstrap to use each once)' },
    { name: 'basis_count', type: 'integer', default: 12, help: 'number of Gaussian basis functions' },
    { name: 'r_min', type: 'number', default: 2.6, help: 'smallest Gaussian centre (Å)' },
    { name: 'r_cut', type: 'number', default: 6.0, help: 'model cutoff (Å)' },
    { name: 'switch_width', type: 'number', default: 1.0, help: 'width of the smooth cutoff region (Å)' },
    { name: 'width_factor', type: 'number', default: 1.0, help: 'Gaussian width / centre spacing' },
    { name: 'basis_jitter', type: 'number', default: 1, help: 'member-specific jitter of the basis centres/width (0..1; 0 = all members share the basis), drawn from the member index (else the seed)' },
    { name: 'ridge', type: 'number', default: 1e-3, help: 'ridge strength lambda on the pair weights' },
    { name: 'anchor_scale', type: 'number', default: 0.05, help: 'std. dev. of the random anchor weights (eV); 0 = plain ridge' },
    { name: 'sigma_energy', type: 'number', default: 0.001, help: 'energy scale in the loss (eV/atom)' },
    { name: 'sigma_force', type: 'number', default: 0.01, help: 'force scale in the loss (eV/Å)' },
    { name: 'training_set_sha256', type: 'string', help: "hash of the training set, recorded in the model (default: task.json input_artifacts.training_set, else the file's sha256)" },
  ],
};

await runProgram(spec, async (r) => {
  const t0 = performance.now();
  const basis = gaussianBasis({
    count: num(r, 'basis_count'),
    rMin: num(r, 'r_min'),
    rCut: num(r, 'r_cut'),
    switchWidth: num(r, 'switch_width'),
    widthFactor: num(r, 'width_factor'),
  });
  const files = r.inputs.training_set;
  const items = await readAll(files, ['forces']);
  const data = items.map(({ frame, file, index }) => labeledConfig(frame, file, index));
  const member = optNum(r, 'member') ?? memberFromTask(r.task);
  const fit = fitModel(data, {
    basis,
    ridge: num(r, 'ridge'),
    anchorScale: num(r, 'anchor_scale'),
    basisJitter: num(r, 'basis_jitter'),
    // each member keeps its own basis across rounds; the seed varies the resample and the anchor
    basisSeed: member,
    sigmaEnergy: num(r, 'sigma_energy'),
    sigmaForce: num(r, 'sigma_force'),
    bootstrap: bool(r, 'bootstrap'),
    seed: r.seed,
  });
  const hashes = await Promise.all(files.map(async (f) => ({ file: basename(f), sha256: await sha256File(f) })));
  const given = r.params.training_set_sha256;
  // the engine's artifact id of the training set, when task.json names it ("sha256:<hex>")
  const artifact = /^sha256:([0-9a-f]{64})$/.exec(r.inputArtifacts.training_set ?? '')?.[1];
  fit.model.training = {
    member: member ?? null,
    seed: r.seed,
    task: r.task ?? null,
    training_set_sha256: typeof given === 'string' ? given : artifact ?? (hashes.length === 1 ? hashes[0].sha256 : null),
    inputs: hashes,
    frames: data.length,
    frames_used: fit.framesUsed,
    bootstrap: bool(r, 'bootstrap'),
    ridge: num(r, 'ridge'),
    anchor_scale: num(r, 'anchor_scale'),
    basis_jitter: num(r, 'basis_jitter'),
    sigma_energy: num(r, 'sigma_energy'),
    sigma_force: num(r, 'sigma_force'),
    train_rmse_energy_meV_per_atom: 1000 * fit.rmse.energy_per_atom_eV,
    train_rmse_force_meV_per_A: 1000 * fit.rmse.force_eV_per_A,
  };
  const path = r.outputs.model as string;
  await saveModel(path, fit.model);
  const s = ((performance.now() - t0) / 1000).toFixed(2);
  process.stdout.write(
    `train: member ${member ?? '-'} seed ${r.seed}: ${data.length} frames (${fit.framesUsed} distinct in the resample), ` +
      `train RMSE ${(1000 * fit.rmse.energy_per_atom_eV).toFixed(3)} meV/atom, ${(1000 * fit.rmse.force_eV_per_A).toFixed(2)} meV/Å, ${s} s -> ${path}\n`,
  );
});

/** "r2/train/0003" -> 3 */
function memberFromTask(task: string | undefined): number | undefined {
  const m = task ? /(\d+)$/.exec(task) : null;
  return m ? Number(m[1]) : undefined;
}
