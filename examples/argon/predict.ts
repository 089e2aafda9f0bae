/**
 * Committee predictions of the argon demo, for validation against held-out reference labels:
 * for every input frame, info energy (committee mean, eV), energy_<m> (each member), per-atom
 * forces (committee mean, eV/Å) and forces_0 ... forces_{M-1}. Frames stay in input order with the
 * same atoms and positions, so the errors gate can compare them with the reference file.
 *
 *   npx tsx examples/argon/predict.ts --in test.xyz --model models/ --out predicted.xyz
 * or, run by the engine, with RATCHET_TASK_JSON (inputs frames|reference and model_0 ... -> outputs.predictions).
 */
import { runProgram, type ProgramSpec } from './lib/cli.js';
import { MODELS_INPUT, predictMain } from './lib/programs.js';

const spec: ProgramSpec = {
  name: 'predict',
  summary: 'committee predictions (mean and per member) on frames',
  inputs: [
    { name: 'frames', aliases: ['reference', 'test_set', 'holdout', 'structures'], flag: 'in', multiple: true, help: 'extended XYZ frames (several files are concatenated)' },
    MODELS_INPUT,
  ],
  outputs: [{ name: 'predictions', aliases: ['predicted'], flag: 'out', help: 'extended XYZ with predicted energy and forces' }],
  params: [],
};

await runProgram(spec, async (r) => {
  process.stdout.write((await predictMain(r, r.inputs.frames, r.outputs.predictions as string)) + '\n');
});
