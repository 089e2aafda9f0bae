/**
 * simulate: one MD task per exploration condition (the task is named after the condition), driven by
 * the committee (model_0 ...), from the condition's start structure, writing trajectory.xyz with every
 * member's forces as forces_0 ... forces_{M-1}. The next round's sample reads these trajectories.
 *
 * Truncation at a contact: after the tasks end, `collect` looks for each trajectory's first frame with
 * a contact violation (or non-finite positions). Where there is one, the run had left physical ground
 * from there on: the frames before it are written to trajectory.kept.xyz, registered as an artifact
 * made from the raw trajectory, and everything downstream (the committee bands here, the next round's
 * sample) reads the kept copy. The raw trajectory stays as the task wrote it.
 *
 * Gate: `contacts` (stages.simulate.contacts) on every raw trajectory, where a violation is a warning
 * that names the cut (frame, frames kept), not a failure, unless no frame at all comes before it; and
 * `committee` (the sample window) on what is kept. Runaway frames warn rather than fail here: finding
 * where the committee is lost is what exploration is for; the next round's selection keeps them out of
 * labeling. Each condition's confident fraction, and its cut if any, go into the verdict's figures (for
 * convergence and `ratchet status`); a condition whose trajectory was cut cannot converge that round.
 * And `trajectory` (held-to-ask.ts, src/gates/trajectory.ts) on every raw trajectory: frames and time span
 * against the task's steps (a run that ends early fails, unless it ends at or after its cut), the mean
 * temperature against the condition's and, for a pressure condition, the mean pressure against its pressure
 * (figures conditions.<name>.mean_temperature_K, mean_pressure_bar).
 */
import { dirname } from 'node:path';
import { readFrames } from '../../atoms/xyz/reader.js';
import { formatFrame } from '../../atoms/xyz/writer.js';
import { checkCommittee } from '../../gates/committee.js';
import { checkContacts, type ContactsFigures } from '../../gates/contacts.js';
import type { GateResult } from '../../gates/types.js';
import type { GateRecord } from '../events.js';
import { exists, writeFileAtomic } from '../fsutil.js';
import { fmt } from '../../gates/verdict.js';
import { simulateHeld } from './held-to-ask.js';
import { stageRecord } from '../state.js';
import { windowFor } from '../calibrate.js';
import { artifactIds, combine, deriveSeed, modelInputs, runGate, stageOutputs, unique } from './common.js';
import type { PlannedTask, StageContext, StageDef, StagePlan } from './types.js';

/** The waiver of this round's validation, with the short runs' steps, when the round explores unvalidated. */
function unvalidatedRun(ctx: StageContext): { steps: Record<string, number> } | undefined {
  return stageRecord(ctx.state, ctx.round, 'validate')?.waived;
}

export const TRAJECTORY_OUTPUT = 'trajectory.xyz';
/** The frames of a trajectory before its first contact violation (written only when there is one). */
export const TRAJECTORY_KEPT = 'trajectory.kept.xyz';

export interface ConditionFigures {
  /** Frames judged by the committee gate (the kept ones). */
  frames: number;
  confident: number;
  informative: number;
  runaway: number;
  confident_fraction: number | null;
  /** Present when the trajectory was cut: its first contact violation, frames written and kept. */
  truncated?: Truncation;
  /** Mean temperature over the run after equilibration (trajectory gate), null when it could not be measured. */
  mean_temperature_K: number | null;
  /** Pressure conditions: mean pressure (stress plus kinetic part), null when it could not be measured. */
  mean_pressure_bar?: number | null;
}

export interface Truncation {
  condition: string;
  first_violation_frame: number;
  frames_written: number;
  frames_kept: number;
}

function contactOptions(ctx: StageContext) {
  const c = ctx.view.campaign.stages.simulate.contacts;
  return { scale: c.scale, hydrogenScale: c.hydrogen_scale, pairLimits: c.min_distance };
}

/** First frame with a contact violation or non-finite positions, or null. */
function firstCut(f: ContactsFigures): number | null {
  const cands = [f.first_violation_frame, f.first_bad_frame].filter((x): x is number => typeof x === 'number');
  return cands.length ? Math.min(...cands) : null;
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
        // A round whose validation failed and was let go on explores with short runs (src/engine/unvalidated.ts).
        steps: unvalidatedRun(ctx)?.steps[cond.name] ?? cond.steps,
        ...(unvalidatedRun(ctx) ? { validated: false } : {}),
        timestep: cond.timestep,
        write_every: cond.write_every,
        committee: ctx.view.committee,
      },
      outputs: { trajectory: { path: TRAJECTORY_OUTPUT, role: 'trajectory' } },
    }));
    return { tasks, inputs: unique(tasks.flatMap((t) => artifactIds(t.inputs))), artifacts: [] };
  },

  /** Write and register the kept copy of every trajectory with a contact violation (idempotent). */
  async collect(ctx) {
    for (const t of stageOutputs(ctx, ctx.round, 'simulate', TRAJECTORY_OUTPUT)) {
      let figures: ContactsFigures;
      try {
        figures = (await checkContacts([t.path], contactOptions(ctx))).figures;
      } catch {
        continue; // unreadable: the gate reports it
      }
      const cut = firstCut(figures);
      if (cut === null || cut === 0) continue;
      const kept: string[] = [];
      let index = 0;
      for await (const f of readFrames(t.path)) {
        if (index++ >= cut) break;
        kept.push(formatFrame(f));
      }
      const path = t.path.slice(0, -TRAJECTORY_OUTPUT.length) + TRAJECTORY_KEPT;
      const content = kept.join('');
      await writeFileAtomic(path, content);
      await ctx.register({
        path,
        role: 'trajectory_kept',
        inputs: t.artifact ? [t.artifact] : [],
        task: t.task,
        command: `ratchet simulate gate: frames before the first contact violation (frame ${cut})`,
        content,
      });
    }
  },

  async gate(ctx) {
    const c = ctx.view.campaign;
    // The campaign's window, or its calibrated form when select.window.calibrate is on (../calibrate.ts).
    const window = windowFor(ctx, ctx.round);
    const gates: GateRecord[] = [];
    const conditions: Record<string, ConditionFigures> = {};
    const truncated: Truncation[] = [];
    const kept = stageOutputs(ctx, ctx.round, 'simulate', TRAJECTORY_KEPT);
    const outs = stageOutputs(ctx, ctx.round, 'simulate', TRAJECTORY_OUTPUT);
    for (const [k, t] of outs.entries()) {
      const seen: { cut: number | null; written: number } = { cut: null, written: 0 };
      const con = await runGate('contacts', t.task, async (): Promise<GateResult<ContactsFigures>> => {
        const r = await checkContacts([t.path], contactOptions(ctx));
        const cut = firstCut(r.figures);
        const written = r.figures.frames;
        seen.cut = cut;
        seen.written = written;
        if (cut === null) return r;
        // A contact ends the usable part of the run: keep what came before, judge that, and go on.
        const reasons =
          cut === 0
            ? [`the first frame already has a contact violation: no frame is usable (${r.reasons.join('; ')})`]
            : [
                `trajectory cut at its first contact violation, frame ${cut}: ${cut} of ${written} frame(s) kept in ${TRAJECTORY_KEPT}` +
                  (r.reasons[0] ? ` (${r.reasons[0]})` : ''),
              ];
        return { ...r, verdict: cut === 0 ? 'fail' : 'warn', reasons };
      });
      gates.push(con);
      const { cut, written } = seen;
      // Frames and time span against the steps asked, mean temperature and pressure (./held-to-ask.ts).
      const cond = ctx.view.conditions.find((x) => x.name === t.name);
      const held = cond ? await simulateHeld({ task: t.task, dir: dirname(t.path), path: t.path }, cond, cut) : undefined;
      if (held) gates.push(held);
      const truncation: Truncation | undefined =
        cut === null ? undefined : { condition: t.name, first_violation_frame: cut, frames_written: written, frames_kept: cut };
      if (truncation) truncated.push(truncation);
      let judged: string | undefined = t.path;
      if (truncation) {
        const keptPath = kept[k];
        judged = cut !== 0 && keptPath?.artifact && (await exists(keptPath.path)) ? keptPath.path : undefined;
        if (cut !== 0 && judged === undefined) {
          gates.push({ gate: 'outputs', task: t.task, verdict: 'fail', reasons: [`${TRAJECTORY_KEPT} was not written`], figures: {} });
        }
      }
      let bands: { confident: number; informative: number; runaway: number } | undefined;
      let frames = 0;
      if (judged !== undefined) {
        const path = judged;
        const com = await runGate('committee', t.task, () =>
          checkCommittee([path], { lower: window.lower, upper: window.upper, models: ctx.view.committee, maxRunawayFraction: 1 }),
        );
        gates.push(com);
        bands = com.figures.bands as typeof bands;
        frames = (com.figures.frames as number | undefined) ?? 0;
      }
      conditions[t.name] = {
        frames,
        confident: bands?.confident ?? 0,
        informative: bands?.informative ?? 0,
        runaway: bands?.runaway ?? 0,
        confident_fraction: bands && frames > 0 ? bands.confident / frames : null,
        ...(truncation ? { truncated: truncation } : {}),
        mean_temperature_K: (held?.figures.mean_temperature_K as number | null | undefined) ?? null,
        ...(cond?.pressure !== undefined ? { mean_pressure_bar: (held?.figures.mean_pressure_bar as number | null | undefined) ?? null } : {}),
      };
    }
    const summary = Object.entries(conditions)
      .map(
        ([name, f]) =>
          `${name}: ${f.frames} frames, ${f.confident} confident, ${f.informative} informative, ${f.runaway} runaway` +
          (f.truncated ? ` (cut at frame ${f.truncated.first_violation_frame} by a contact)` : '') +
          (f.mean_temperature_K !== null ? `, mean ${fmt(f.mean_temperature_K)} K` : ', mean temperature not measured') +
          (f.mean_pressure_bar !== undefined ? (f.mean_pressure_bar !== null ? `, mean ${fmt(f.mean_pressure_bar)} bar` : ', mean pressure not measured') : ''),
      )
      .join('; ');
    const figures: Record<string, unknown> = truncated.length ? { conditions, truncated } : { conditions };
    if (window.ratio !== null) figures.window = window;
    return { ...combine(gates, figures), summary };
  },
};
