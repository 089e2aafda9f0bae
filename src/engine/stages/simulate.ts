/**
 * simulate: one MD task per exploration condition (the task is named after the condition), driven by
 * the committee (model_0 ...), from the condition's start structure, writing trajectory.xyz with every
 * member's forces as forces_0 ... forces_{M-1}. The next round's sample reads these trajectories.
 * Gate: `contacts` (stages.simulate.contacts) and `committee` (the sample window) on every trajectory.
 * Runaway frames warn rather than fail here: finding where the committee is lost is what exploration
 * is for; the next round's selection keeps them out of labeling. Each condition's confident fraction
 * goes into the verdict's figures (for convergence and `ratchet status`).
 */
import { checkCommittee } from '../../gates/committee.js';
import { checkContacts } from '../../gates/contacts.js';
import type { GateRecord } from '../events.js';
import { artifactIds, combine, deriveSeed, modelInputs, runGate, stageOutputs, unique } from './common.js';
import type { PlannedTask, StageDef, StagePlan } from './types.js';

export const TRAJECTORY_OUTPUT = 'trajectory.xyz';

export interface ConditionFigures {
  frames: number;
  confident: number;
  informative: number;
  runaway: number;
  confident_fraction: number | null;
}

export const simulate: StageDef = {
  stage: 'simulate',

  async plan(ctx): Promise<StagePlan> {
    const models = modelInputs(ctx, ctx.round);
    const params = ctx.view.stages.simulate.params;
    const tasks: PlannedTask[] = ctx.view.conditions.map((cond) => ({
      name: cond.name,
      seed: deriveSeed(cond.seed, `r${ctx.round}/simulate/${cond.name}`),
      inputs: { ...models, start: { path: cond.start, artifact: ctx.artifactId(cond.start) } },
      params: {
        ...params,
        condition: cond.name,
        temperature: cond.temperature,
        ...(cond.pressure !== undefined ? { pressure: cond.pressure } : {}),
        steps: cond.steps,
        timestep: cond.timestep,
        write_every: cond.write_every,
        committee: ctx.view.committee,
      },
      outputs: { trajectory: { path: TRAJECTORY_OUTPUT, role: 'trajectory' } },
    }));
    return { tasks, inputs: unique(tasks.flatMap((t) => artifactIds(t.inputs))), artifacts: [] };
  },

  async gate(ctx) {
    const c = ctx.view.campaign;
    const window = c.stages.sample.select.window;
    const gates: GateRecord[] = [];
    const conditions: Record<string, ConditionFigures> = {};
    for (const t of stageOutputs(ctx, ctx.round, 'simulate', TRAJECTORY_OUTPUT)) {
      gates.push(
        await runGate('contacts', t.task, () =>
          checkContacts([t.path], { scale: c.stages.simulate.contacts.scale, pairLimits: c.stages.simulate.contacts.min_distance }),
        ),
      );
      const com = await runGate('committee', t.task, () =>
        checkCommittee([t.path], { lower: window.lower, upper: window.upper, models: ctx.view.committee, maxRunawayFraction: 1 }),
      );
      gates.push(com);
      const bands = com.figures.bands as { confident: number; informative: number; runaway: number } | undefined;
      const frames = (com.figures.frames as number | undefined) ?? 0;
      conditions[t.name] = {
        frames,
        confident: bands?.confident ?? 0,
        informative: bands?.informative ?? 0,
        runaway: bands?.runaway ?? 0,
        confident_fraction: bands && frames > 0 ? bands.confident / frames : null,
      };
    }
    const summary = Object.entries(conditions)
      .map(([name, f]) => `${name}: ${f.frames} frames, ${f.confident} confident, ${f.informative} informative, ${f.runaway} runaway`)
      .join('; ');
    return { ...combine(gates, { conditions }), summary };
  },
};
