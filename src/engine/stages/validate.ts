/**
 * validate: the committee against data it was not trained on, and a short constant-energy run per
 * condition. Tasks (all run the validate command; RATCHET_PARAM_KIND tells which):
 *   errors      kind "errors": predict energy and forces of the held-out frames (input `reference`,
 *               label's test.xyz) with the committee (model_0 ...), write predictions.xyz (same frames,
 *               same order, predicted `energy` and `forces`)
 *   nve-<cond>  kind "nve": constant-energy MD from the condition's start structure for nve_steps steps,
 *               write trajectory.xyz (with total_energy, or energy and velocities); a pressure condition
 *               starts from a cell it reached (nve-start.ts: start.xyz in the task directory from round 1)
 * Gate: `errors` (energy, force and stress figures against stages.validate.errors, forces per element too),
 * `drift` (|slope| and its standard error against max_drift, run length against drift_min_frames/drift_min_span), `contacts` and `trajectory` (frames and time span against
 * nve_steps, held-to-ask.ts) on every constant-energy run.
 */
import { dirname } from 'node:path';
import { checkContacts } from '../../gates/contacts.js';
import { checkDrift } from '../../gates/drift.js';
import { checkErrors } from '../../gates/errors.js';
import { driftGateOptions, errorsGateOptions } from './validate-limits.js';
import type { GateRecord } from '../events.js';
import { stageId } from '../ids.js';
import { readJsonMaybe } from '../fsutil.js';
import { artifactIds, combine, deriveSeed, modelInputs, runGate, stageOutputs, unique } from './common.js';
import { labelFiles } from './label.js';
import { nveHeld } from './held-to-ask.js';
import { nveStart } from './nve-start.js';
import type { NewArtifact, PlannedTask, StageDef, StagePlan } from './types.js';

export const ERRORS_TASK = 'errors';
export const NVE_PREFIX = 'nve-';
export const PREDICTIONS_OUTPUT = 'predictions.xyz';
export const NVE_OUTPUT = 'trajectory.xyz';

export const validate: StageDef = {
  stage: 'validate',

  async plan(ctx): Promise<StagePlan> {
    const v = ctx.view.campaign.stages.validate;
    const models = modelInputs(ctx, ctx.round);
    const test = labelFiles(ctx, ctx.round).test;
    const testId = ctx.artifactId(test);
    if (!testId) throw new Error(`internal: ${stageId(ctx.round, 'label')} has no registered test set`);
    const params = ctx.view.stages.validate.params;
    const tasks: PlannedTask[] = [
      {
        name: ERRORS_TASK,
        seed: deriveSeed(ctx.view.seed, `r${ctx.round}/validate/${ERRORS_TASK}`),
        inputs: { ...models, reference: { path: test, artifact: testId } },
        params: { ...params, kind: 'errors', committee: ctx.view.committee },
        outputs: { predictions: { path: PREDICTIONS_OUTPUT, role: 'predictions' } },
      },
    ];
    const artifacts: NewArtifact[] = [];
    for (const cond of ctx.view.conditions) {
      const name = `${NVE_PREFIX}${cond.name}`;
      // A pressure condition starts from a cell it reached (src/engine/stages/nve-start.ts).
      const start = await nveStart(ctx, cond, name);
      artifacts.push(...start.artifacts);
      tasks.push({
        name,
        seed: deriveSeed(cond.seed, `r${ctx.round}/validate/${name}`),
        inputs: { ...models, start: start.input },
        ...(Object.keys(start.files).length ? { files: start.files } : {}),
        params: {
          ...params,
          kind: 'nve',
          condition: cond.name,
          temperature: cond.temperature,
          ...(start.pressure !== undefined ? { pressure: start.pressure } : {}),
          steps: v.nve_steps,
          timestep: v.nve_timestep ?? cond.timestep,
          write_every: cond.write_every,
          committee: ctx.view.committee,
        },
        outputs: { trajectory: { path: NVE_OUTPUT, role: 'validation' } },
      });
    }
    const inputs = unique(tasks.flatMap((t) => artifactIds(t.inputs)));
    return { tasks, inputs, artifacts };
  },

  async gate(ctx) {
    const c = ctx.view.campaign;
    const v = c.stages.validate;
    const gates: GateRecord[] = [];
    const check = await readJsonMaybe<{ test_frames?: number }>(labelFiles(ctx, ctx.round).check);
    const [pred] = stageOutputs(ctx, ctx.round, 'validate', PREDICTIONS_OUTPUT).filter((o) => o.name === ERRORS_TASK);
    if ((check?.test_frames ?? 0) === 0) {
      gates.push({ gate: 'errors', verdict: 'warn', reasons: ['no held-out frames yet: the errors were not measured'], figures: { frames: 0 }, task: pred?.task });
    } else {
      const rec = await runGate('errors', pred.task, () =>
        // The same limits and rules as `ratchet check errors` (src/gates/limits.ts), per element for forces.
        checkErrors(labelFiles(ctx, ctx.round).test, pred.path, errorsGateOptions(v)),
      );
      gates.push(rec);
    }
    const runs = stageOutputs(ctx, ctx.round, 'validate', NVE_OUTPUT).filter((o) => o.name.startsWith(NVE_PREFIX));
    const drift: Record<string, unknown> = {};
    for (const r of runs) {
      const cond = c.conditions.find((k) => `${NVE_PREFIX}${k.name}` === r.name);
      const timestep = v.nve_timestep ?? cond?.timestep;
      const d = await runGate('drift', r.task, () =>
        checkDrift([r.path], driftGateOptions(v, timestep)),
      );
      gates.push(d);
      drift[r.name.slice(NVE_PREFIX.length)] = d.figures.slope_meV_per_atom_per_ps ?? null;
      gates.push(
        await runGate('contacts', r.task, () =>
          checkContacts([r.path], { scale: v.contacts.scale, hydrogenScale: v.contacts.hydrogen_scale, pairLimits: v.contacts.min_distance }),
        ),
      );
    }
    // Each constant-energy run against the nve_steps asked: an early stop is named as such (src/gates/trajectory.ts).
    for (const r of runs) {
      const cond = ctx.view.conditions.find((k) => `${NVE_PREFIX}${k.name}` === r.name);
      if (cond) gates.push(await nveHeld({ task: r.task, dir: dirname(r.path), path: r.path }, cond, v.nve_steps, v.nve_timestep ?? cond.timestep));
    }
    const errors = gates.find((g) => g.gate === 'errors');
    return combine(
      gates,
      {
        energy_rmse_meV_per_atom: errors?.figures.energy_rmse_meV_per_atom ?? null,
        force_rmse_meV_per_A: errors?.figures.force_rmse_meV_per_A ?? null,
        drift_meV_per_atom_per_ps: drift,
      },
    );
  },
};

