/**
 * train: one task per committee member (names 0000 .. M-1), each with its own seed, reading the
 * round's training set (label's train.xyz) and writing `model` (a file or a directory).
 * Gate: every member wrote its model (checked when outputs are collected); the command's exit codes
 * are the rest of the verdict.
 */
import { stageId, taskName } from '../ids.js';
import { deriveSeed, combine } from './common.js';
import { labelFiles } from './label.js';
import type { PlannedTask, StageDef, StagePlan } from './types.js';

export const MODEL_OUTPUT = 'model';

export const train: StageDef = {
  stage: 'train',

  async plan(ctx): Promise<StagePlan> {
    const set = labelFiles(ctx, ctx.round).train;
    const id = ctx.artifactId(set);
    if (!id) throw new Error(`internal: ${stageId(ctx.round, 'label')} has no registered training set`);
    const m = ctx.view.committee;
    const c = ctx.view.campaign.committee;
    const tasks: PlannedTask[] = [];
    for (let k = 0; k < m; k++) {
      const name = taskName(k, m);
      tasks.push({
        name,
        // The member's seed: derived from the committee's base seed, the round and the member.
        seed: deriveSeed(c.seed, `r${ctx.round}/train/${k}`),
        inputs: { training_set: { path: set, artifact: id } },
        params: { ...ctx.view.stages.train.params, member: k, committee: m, bootstrap: c.bootstrap },
        outputs: { model: { path: MODEL_OUTPUT, role: 'model' } },
      });
    }
    return { tasks, inputs: [id], artifacts: [] };
  },

  async gate(ctx) {
    return combine([
      { gate: 'exit', verdict: 'pass', reasons: [`${ctx.view.committee} models trained`], figures: { models: ctx.view.committee } },
    ]);
  },
};
