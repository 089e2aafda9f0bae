/**
 * validate: the committee against data it was not trained on, and a short constant-energy run per
 * condition. Tasks (all run the validate command; RATCHET_PARAM_KIND tells which):
 *   errors      kind "errors": predict energy and forces of the held-out frames (input `reference`,
 *               label's test.xyz) with the committee (model_0 ...), write predictions.xyz (same frames,
 *               same order, predicted `energy` and `forces`)
 *   nve-<cond>  kind "nve": constant-energy MD from the condition's start structure for nve_steps steps,
 *               write trajectory.xyz (with total_energy, or energy and velocities)
 * Gate: `errors` (energy and force RMSE against stages.validate.errors; MAE limits when given),
 * `drift` (|slope| against max_drift) and `contacts` on every constant-energy run.
 */
import { checkContacts } from '../../gates/contacts.js';
import { checkDrift } from '../../gates/drift.js';
import { checkErrors } from '../../gates/errors.js';
import { fmt } from '../../gates/verdict.js';
import type { GateRecord } from '../events.js';
import { stageId } from '../ids.js';
import { readJsonMaybe } from '../fsutil.js';
import { artifactIds, combine, deriveSeed, modelInputs, runGate, stageOutputs, unique } from './common.js';
import { labelFiles } from './label.js';
import type { PlannedTask, StageDef, StagePlan } from './types.js';

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
    for (const cond of ctx.view.conditions) {
      const startId = ctx.artifactId(cond.start);
      const name = `${NVE_PREFIX}${cond.name}`;
      tasks.push({
        name,
        seed: deriveSeed(cond.seed, `r${ctx.round}/validate/${name}`),
        inputs: { ...models, start: { path: cond.start, artifact: startId } },
        params: {
          ...params,
          kind: 'nve',
          condition: cond.name,
          temperature: cond.temperature,
          steps: v.nve_steps,
          timestep: v.nve_timestep ?? cond.timestep,
          write_every: cond.write_every,
          committee: ctx.view.committee,
        },
        outputs: { trajectory: { path: NVE_OUTPUT, role: 'validation' } },
      });
    }
    const inputs = unique(tasks.flatMap((t) => artifactIds(t.inputs)));
    return { tasks, inputs, artifacts: [] };
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
        checkErrors(labelFiles(ctx, ctx.round).test, pred.path, {
          energyRmseFail: v.errors.energy_rmse,
          energyRmseWarn: Number.POSITIVE_INFINITY,
          forceRmseFail: v.errors.force_rmse,
          forceRmseWarn: Number.POSITIVE_INFINITY,
        }),
      );
      // MAE limits, when the campaign gives them, on the gate's own figures.
      const f = rec.figures as { energy_mae_meV_per_atom?: number; force_mae_meV_per_A?: number };
      if (v.errors.energy_mae !== undefined && typeof f.energy_mae_meV_per_atom === 'number' && f.energy_mae_meV_per_atom > v.errors.energy_mae) {
        rec.verdict = 'fail';
        rec.reasons.push(`energy MAE ${fmt(f.energy_mae_meV_per_atom)} meV/atom is above the limit ${fmt(v.errors.energy_mae)} meV/atom`);
      }
      if (v.errors.force_mae !== undefined && typeof f.force_mae_meV_per_A === 'number' && f.force_mae_meV_per_A > v.errors.force_mae) {
        rec.verdict = 'fail';
        rec.reasons.push(`force MAE ${fmt(f.force_mae_meV_per_A)} meV/Å is above the limit ${fmt(v.errors.force_mae)} meV/Å`);
      }
      gates.push(rec);
    }
    const runs = stageOutputs(ctx, ctx.round, 'validate', NVE_OUTPUT).filter((o) => o.name.startsWith(NVE_PREFIX));
    const drift: Record<string, unknown> = {};
    for (const r of runs) {
      const cond = c.conditions.find((k) => `${NVE_PREFIX}${k.name}` === r.name);
      const timestep = v.nve_timestep ?? cond?.timestep;
      const d = await runGate('drift', r.task, () =>
        checkDrift([r.path], { timestep, slopeFail: v.max_drift, slopeWarn: Math.min(v.max_drift, 0.1) }),
      );
      gates.push(d);
      drift[r.name.slice(NVE_PREFIX.length)] = d.figures.slope_meV_per_atom_per_ps ?? null;
      gates.push(
        await runGate('contacts', r.task, () =>
          checkContacts([r.path], { scale: v.contacts.scale, pairLimits: v.contacts.min_distance }),
        ),
      );
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

