/**
 * Validation of the argon demo: one program for the engine's two kinds of validate task
 * (params.kind, also RATCHET_PARAM_KIND):
 *   kind "errors": committee predictions on the held-out frames (inputs.reference, model_0 ...)
 *                  -> outputs.predictions (same frames and order, mean energy and forces, every member's);
 *   kind "nve":    constant-energy MD from the condition's start structure (inputs.start, model_0 ...),
 *                  velocities drawn at params.temperature, Langevin equilibration first (1000 steps by default)
 *                  -> outputs.trajectory (total_energy, velocities, forces_<m>) for the drift gate.
 *
 *   npx tsx examples/argon/validate.ts --kind errors --in test.xyz --model models/ --predictions pred.xyz
 *   npx tsx examples/argon/validate.ts --kind nve --start fcc.xyz --model models/ --out nve.xyz --temperature 30 --steps 1000
 */
import { runProgram, str, UsageError, type ProgramSpec } from './lib/cli.js';
import { MD_PARAMS, MODELS_INPUT, START_INPUT, mdMain, predictMain } from './lib/programs.js';

const spec: ProgramSpec = {
  name: 'validate',
  summary: 'validation task: committee predictions on held-out frames (kind errors) or a constant-energy run (kind nve)',
  inputs: [
    { name: 'reference', aliases: ['frames', 'test_set', 'holdout'], flag: 'in', multiple: true, required: false, help: 'kind errors: held-out labeled frames' },
    { ...START_INPUT, required: false, help: 'kind nve: starting structure' },
    MODELS_INPUT,
  ],
  outputs: [
    { name: 'predictions', aliases: ['predicted'], flag: 'predictions', required: false, help: 'kind errors: extended XYZ predictions' },
    { name: 'trajectory', aliases: ['traj'], flag: 'out', required: false, help: 'kind nve: extended XYZ trajectory' },
    { name: 'summary', flag: 'summary', required: false, help: 'kind nve: optional JSON summary' },
  ],
  params: [
    { name: 'kind', type: 'string', choices: ['errors', 'nve'], help: 'which validation task (required)' },
    ...MD_PARAMS.map((p) => (p.name === 'equilibration_steps' ? { ...p, default: 1000 } : p)),
  ],
};

await runProgram(spec, async (r) => {
  const kind = r.params.kind;
  if (kind === undefined) throw new UsageError("validate: missing parameter 'kind': give --kind errors|nve, RATCHET_PARAM_KIND or task.json params.kind");
  if (str(r, 'kind') === 'errors') {
    if (r.inputs.reference.length === 0) throw new UsageError("validate: kind errors needs input 'reference' (--in FILE or task.json inputs.reference)");
    if (!r.outputs.predictions) throw new UsageError("validate: kind errors needs output 'predictions' (--predictions FILE or task.json outputs.predictions)");
    process.stdout.write((await predictMain(r, r.inputs.reference, r.outputs.predictions)) + '\n');
  } else {
    if (r.inputs.start.length === 0) throw new UsageError("validate: kind nve needs input 'start' (--start FILE or task.json inputs.start)");
    if (!r.outputs.trajectory) throw new UsageError("validate: kind nve needs output 'trajectory' (--out FILE or task.json outputs.trajectory)");
    process.stdout.write((await mdMain(r, 'nve', r.outputs.trajectory, r.outputs.summary)) + '\n');
  }
});
