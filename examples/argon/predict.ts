/**
 * Committee predictions of the argon demo, for validation against held-out reference labels:
 * for every input frame, info energy (committee mean, eV), energy_<m> (each member), per-atom
 * forces (committee mean, eV/Å) and forces_0 ... forces_{M-1}. Frames stay in input order with the
 * same atoms and positions, so the errors gate can compare them with the reference file.
 *
 *   npx tsx examples/argon/predict.ts --in test.xyz --model models/ --out predicted.xyz
 * or, run by the engine, with RATCHET_TASK_JSON (inputs.frames and inputs.models|model_<m> -> outputs.predictions).
 */
import { writeFrames } from '../../src/atoms/xyz/writer.js';
import { runProgram, type ProgramSpec } from './lib/cli.js';
import { loadCommittee } from './lib/committee.js';
import { readAll, requirePeriodicOrFree } from './lib/frames.js';
import { predictFrame } from './lib/predict.js';

const spec: ProgramSpec = {
  name: 'predict',
  summary: 'committee predictions (mean and per member) on frames',
  inputs: [
    { name: 'frames', aliases: ['test_set', 'holdout', 'structures'], flag: 'in', multiple: true, help: 'extended XYZ frames (several files are concatenated)' },
    { name: 'models', aliases: ['committee', 'model'], pattern: /^model_\d+$/, flag: 'model', multiple: true, help: 'model JSON files or a directory of them' },
  ],
  outputs: [{ name: 'predictions', aliases: ['predicted'], flag: 'out', help: 'extended XYZ with predicted energy and forces' }],
  params: [],
};

await runProgram(spec, async (r) => {
  const t0 = performance.now();
  const { models } = await loadCommittee(r.inputs.models);
  const items = await readAll(r.inputs.frames, []);
  const out = items.map(({ frame, file, index }) => {
    requirePeriodicOrFree(frame, file, index);
    return predictFrame(frame, models);
  });
  const path = r.outputs.predictions as string;
  await writeFrames(path, out);
  process.stdout.write(`predict: ${out.length} frames with ${models.length} models in ${((performance.now() - t0) / 1000).toFixed(2)} s -> ${path}\n`);
});
