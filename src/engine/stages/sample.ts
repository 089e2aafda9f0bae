/**
 * sample: one task ("0000") that writes the frames to label this round (frames.xyz).
 * Round 0 reads the campaign's starting structures; later rounds read the previous round's
 * trajectories (one per condition; the kept copy where the simulate gate cut one at a contact). The choice of frames is the sample policy's (../sample-policy.ts),
 * run inside ratchet; a campaign may instead give `stages.sample.command`, run like any other task
 * with its sources as inputs source_0, source_1, ...
 * Gate: the frames file exists and is readable; no frame at all in round 0 fails, in later rounds warns.
 */
import { readFrames } from '../../atoms/xyz/reader.js';
import { readJsonMaybe } from '../fsutil.js';
import { windowFor } from '../calibrate.js';
import { abs, taskDirRel } from '../layout.js';
import type { SampleOutcome, SampleSource } from '../sample-policy.js';
import { deriveSeed, runGate, stageOutputs, combine } from './common.js';
import { TRAJECTORY_KEPT, TRAJECTORY_OUTPUT } from './simulate.js';
import type { StageContext, StageDef, StagePlan, TaskInput } from './types.js';

export const SAMPLE_TASK = '0000';
export const SAMPLE_OUTPUT = 'frames.xyz';
/** What the built-in policy returned, kept beside its output for the gate and status. */
export const SAMPLE_SUMMARY = 'sample.json';

/** Register the campaign's starting structures (top-level and per condition); ids by absolute path. */
export async function registerStarts(ctx: StageContext): Promise<Map<string, string>> {
  const ids = new Map<string, string>();
  const paths = [...ctx.view.start, ...ctx.view.conditions.map((c) => c.start)];
  for (const p of paths) {
    if (!ids.has(p)) ids.set(p, await ctx.register({ path: p, role: 'start', inputs: [] }));
  }
  return ids;
}

async function sources(ctx: StageContext): Promise<{ kind: 'start' | 'trajectories'; list: SampleSource[] }> {
  if (ctx.round === 0) {
    const ids = await registerStarts(ctx);
    return { kind: 'start', list: ctx.view.start.map((p) => ({ path: p, artifact: ids.get(p)! })) };
  }
  // A trajectory the simulate gate cut at its first contact violation is read through its kept copy.
  const prev = stageOutputs(ctx, ctx.round - 1, 'simulate', TRAJECTORY_OUTPUT);
  const kept = stageOutputs(ctx, ctx.round - 1, 'simulate', TRAJECTORY_KEPT);
  return {
    kind: 'trajectories',
    list: prev.map((t, k) => {
      const use = kept[k]?.artifact ? kept[k] : t;
      if (!use.artifact) throw new Error(`internal: ${t.task} has no registered trajectory`);
      return { path: use.path, artifact: use.artifact, condition: t.name };
    }),
  };
}

/** Parameters handed to the policy (or, for a sample command, to task.json). */
export function sampleParams(ctx: StageContext): Record<string, unknown> {
  const c = ctx.view.campaign;
  const s = c.stages.sample;
  // What the policy reads (PolicySettings in src/select/policy.ts): selected frames must pass the
  // same contact limits as the trajectories they come from, and fingerprints use the campaign's species.
  // The window is the campaign's, or its calibrated form when select.window.calibrate is on (../calibrate.ts).
  const w = windowFor(ctx, ctx.round);
  const select = { ...s.select, window: { lower: w.lower, upper: w.upper } };
  return { ...s.params, perturb: s.perturb, select, contacts: c.stages.simulate.contacts, species: c.species, holdout: c.holdout };
}

export const sample: StageDef = {
  stage: 'sample',

  async plan(ctx): Promise<StagePlan> {
    const src = await sources(ctx);
    const inputs: Record<string, TaskInput> = {};
    src.list.forEach((s, k) => {
      inputs[`source_${k}`] = { path: s.path, artifact: s.artifact };
    });
    const builtin = ctx.view.stages.sample.command === undefined;
    return {
      tasks: [
        {
          name: SAMPLE_TASK,
          seed: deriveSeed(ctx.view.seed, `r${ctx.round}/sample`),
          inputs,
          params: {
            kind: src.kind,
            committee: ctx.view.committee,
            conditions: src.list.map((s) => s.condition ?? null),
            ...sampleParams(ctx),
          },
          outputs: { frames: { path: SAMPLE_OUTPUT, role: 'selected' } },
          builtin,
        },
      ],
      inputs: src.list.map((s) => s.artifact),
      artifacts: [],
    };
  },

  async gate(ctx) {
    const dir = abs(ctx.view.dir, taskDirRel(ctx.round, 'sample', SAMPLE_TASK));
    const summary = await readJsonMaybe<SampleOutcome>(abs(dir, SAMPLE_SUMMARY));
    const path = abs(dir, SAMPLE_OUTPUT);
    const rec = await runGate('frames', `r${ctx.round}/sample/${SAMPLE_TASK}`, async () => {
      let frames = 0;
      for await (const _f of readFrames(path, { columns: [] })) frames++;
      const reasons: string[] = [];
      let verdict: 'pass' | 'warn' | 'fail' = 'pass';
      if (frames === 0) {
        verdict = ctx.round === 0 ? 'fail' : 'warn';
        reasons.push(ctx.round === 0 ? 'no frames to start from' : 'no frame was selected for labeling this round');
      } else reasons.push(`${frames} frame${frames === 1 ? '' : 's'} to label`);
      return { gate: 'frames', verdict, reasons, figures: { frames } };
    });
    const figures: Record<string, unknown> = { frames: rec.figures.frames ?? null };
    if (summary?.conditions) figures.conditions = summary.conditions;
    if (summary?.figures) figures.policy = summary.figures;
    if (summary?.notes?.length) figures.notes = summary.notes;
    return combine([rec], figures);
  },
};
