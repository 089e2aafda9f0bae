/**
 * label: the selected frames in chunks of `frames_per_task`, one task per chunk. The engine writes
 * each chunk into its task directory as frames.xyz (registered as a 'chunk' artifact); the command
 * writes labeled.xyz: the same frames, in the same order, with `energy` (eV) and `forces` (eV/Å).
 *
 * Once every task succeeded, collect checks every labeled frame (energy and forces present and finite,
 * largest force component under `max_force`, no close contacts) and keeps the rejected ones out:
 *   rounds/rK/label/labeled.xyz  this round's accepted frames              (role 'labeled_round')
 *   rounds/rK/label/train.xyz    all rounds' accepted frames not held out  (role 'training_set')
 *   rounds/rK/label/test.xyz     all rounds' accepted frames held out      (role 'test_set')
 *   rounds/rK/label/check.json   what was rejected and why (its figures go into the verdict)
 * Held-out frames are chosen by a hash of their content (src/select/holdout.ts), so a frame is test or
 * train in every round alike. Gate: fails when a task returned a different number of frames than it
 * was given, or when more than `max_rejected_fraction` of the frames were rejected; warns for fewer.
 */
import { createHash } from 'node:crypto';
import { readFile } from 'node:fs/promises';
import type { Frame } from '../../atoms/frame.js';
import { realArray, numberInfo } from '../../atoms/frame.js';
import { readFrames } from '../../atoms/xyz/reader.js';
import { formatFrame } from '../../atoms/xyz/writer.js';
import { contactsFrame } from '../../gates/contacts.js';
import { fmt } from '../../gates/verdict.js';
import { artifactId } from '../../ledger/artifacts.js';
import { isHeldOut } from '../../select/holdout.js';
import { taskName, stageId } from '../ids.js';
import { abs, stageDirRel } from '../layout.js';
import { exists, readJsonMaybe, writeFileAtomic } from '../fsutil.js';
import { SAMPLE_OUTPUT } from './sample.js';
import { deriveSeed, stageOutputs, taskDir, combine, unique } from './common.js';
import type { NewArtifact, PlannedTask, StageContext, StageDef, StagePlan } from './types.js';

export const LABEL_INPUT = 'frames.xyz';
export const LABEL_OUTPUT = 'labeled.xyz';
export const ROUND_LABELED = 'labeled.xyz';
export const TRAIN_SET = 'train.xyz';
export const TEST_SET = 'test.xyz';
export const CHECK_FILE = 'check.json';

/** The stage-level files of a round's label stage (absolute). */
export function labelFiles(ctx: StageContext, round: number): { labeled: string; train: string; test: string; check: string } {
  const d = abs(ctx.view.dir, stageDirRel(round, 'label'));
  return { labeled: abs(d, ROUND_LABELED), train: abs(d, TRAIN_SET), test: abs(d, TEST_SET), check: abs(d, CHECK_FILE) };
}

export interface LabelCheckOptions {
  maxForce: number;
  contacts: { scale: number; pairLimits: Record<string, number> };
}

/** Why a labeled frame cannot be used, or null when it can. Pure. */
export function labelProblem(frame: Frame, index: number, o: LabelCheckOptions): string | null {
  const e = numberInfo(frame, 'energy');
  if (e === undefined) return 'no energy';
  if (!Number.isFinite(e)) return `non-finite energy ${e}`;
  const f = realArray(frame, 'forces', 3);
  if (!f) return 'no forces (a per-atom real array of width 3 named forces)';
  let worst = 0;
  let at = -1;
  for (let k = 0; k < f.length; k++) {
    const v = f[k];
    if (!Number.isFinite(v)) return `non-finite force on atom ${Math.floor(k / 3)}`;
    if (Math.abs(v) > worst) {
      worst = Math.abs(v);
      at = Math.floor(k / 3);
    }
  }
  if (worst > o.maxForce) return `force component ${fmt(worst)} eV/Å on atom ${at} is above max_force ${fmt(o.maxForce)} eV/Å`;
  const c = contactsFrame(frame, index, { scale: o.contacts.scale, pairLimits: o.contacts.pairLimits, maxPerFrame: 1 });
  if (c.missing) return c.missing;
  if (c.bad) return c.bad;
  if (c.violationCount > 0) {
    const v = c.violations[0];
    return `${c.violationCount} close contact(s), e.g. atoms ${v.i} and ${v.j} (${v.species.join('-')}) at ${fmt(v.distance)} Å < ${fmt(v.limit)} Å`;
  }
  return null;
}

interface Rejected {
  task: string;
  frame: number;
  reason: string;
}

interface CheckSummary {
  frames: number;
  accepted: number;
  rejected_count: number;
  /** At most 100, in task and frame order. */
  rejected: Rejected[];
  /** Tasks that returned a different number of frames than they were given. */
  mismatched: { task: string; given: number; returned: number }[];
  train_frames: number;
  test_frames: number;
}

async function countFrames(path: string): Promise<number> {
  let n = 0;
  for await (const _f of readFrames(path, { columns: [] })) n++;
  return n;
}

export const label: StageDef = {
  stage: 'label',

  async plan(ctx): Promise<StagePlan> {
    const selected = stageOutputs(ctx, ctx.round, 'sample', SAMPLE_OUTPUT)[0];
    if (!selected?.artifact) throw new Error(`internal: ${stageId(ctx.round, 'sample')} has no registered frames`);
    const texts: string[] = [];
    for await (const f of readFrames(selected.path)) texts.push(formatFrame(f));
    const per = ctx.view.framesPerTask;
    const count = Math.ceil(texts.length / per);
    const tasks: PlannedTask[] = [];
    const artifacts: NewArtifact[] = [];
    const stageParams = ctx.view.stages.label.params;
    for (let k = 0; k < count; k++) {
      const name = taskName(k, count);
      const content = texts.slice(k * per, (k + 1) * per).join('');
      const path = abs(taskDir(ctx, ctx.round, 'label', name), LABEL_INPUT);
      const id = artifactId(createHash('sha256').update(content).digest('hex'));
      artifacts.push({ path, role: 'chunk', inputs: [selected.artifact], content, written: true });
      tasks.push({
        name,
        seed: deriveSeed(ctx.view.seed, `r${ctx.round}/label/${name}`),
        inputs: { frames: { path, artifact: id } },
        params: { ...stageParams, first_frame: k * per, frames: Math.min(per, texts.length - k * per) },
        outputs: { labeled: { path: LABEL_OUTPUT, role: 'labeled' } },
        files: { [LABEL_INPUT]: content },
      });
    }
    return { tasks, inputs: [selected.artifact], artifacts, notes: [`${texts.length} frames in ${count} task(s) of up to ${per}`] };
  },

  async collect(ctx) {
    const c = ctx.view.campaign;
    const opts: LabelCheckOptions = {
      maxForce: c.stages.label.max_force,
      contacts: { scale: c.stages.label.contacts.scale, pairLimits: c.stages.label.contacts.min_distance },
    };
    const outs = stageOutputs(ctx, ctx.round, 'label', LABEL_OUTPUT);
    const accepted: string[] = [];
    const train: string[] = [];
    const test: string[] = [];
    const summary: CheckSummary = { frames: 0, accepted: 0, rejected_count: 0, rejected: [], mismatched: [], train_frames: 0, test_frames: 0 };
    for (const o of outs) {
      const given = await countFrames(abs(taskDir(ctx, ctx.round, 'label', o.name), LABEL_INPUT));
      let index = 0;
      for await (const f of readFrames(o.path)) {
        const problem = labelProblem(f, index, opts);
        summary.frames++;
        if (problem) {
          summary.rejected_count++;
          if (summary.rejected.length < 100) summary.rejected.push({ task: o.task, frame: index, reason: problem });
        } else {
          const text = formatFrame(f);
          accepted.push(text);
          if (isHeldOut(f, c.holdout)) test.push(text);
          else train.push(text);
        }
        index++;
      }
      if (index !== given) summary.mismatched.push({ task: o.task, given, returned: index });
    }
    summary.accepted = accepted.length;
    const files = labelFiles(ctx, ctx.round);
    const prev = ctx.round > 0 ? labelFiles(ctx, ctx.round - 1) : undefined;
    const prevText = async (p: string | undefined): Promise<string> => (p && (await exists(p)) ? await readFile(p, 'utf8') : '');
    const trainText = (await prevText(prev?.train)) + train.join('');
    const testText = (await prevText(prev?.test)) + test.join('');
    const prevSummary = prev ? await readJsonMaybe<CheckSummary>(prev.check) : undefined;
    summary.train_frames = (prevSummary?.train_frames ?? 0) + train.length;
    summary.test_frames = (prevSummary?.test_frames ?? 0) + test.length;
    await writeFileAtomic(files.labeled, accepted.join(''));
    await writeFileAtomic(files.train, trainText);
    await writeFileAtomic(files.test, testText);
    await writeFileAtomic(files.check, JSON.stringify(summary, null, 2) + '\n');
    const taskIds = unique(outs.map((o) => o.artifact).filter((a): a is string => a !== undefined));
    const labeledId = await ctx.register({ path: files.labeled, role: 'labeled_round', inputs: taskIds, content: accepted.join('') });
    const prevTrain = prev ? ctx.artifactId(prev.train) : undefined;
    const prevTest = prev ? ctx.artifactId(prev.test) : undefined;
    await ctx.register({ path: files.train, role: 'training_set', inputs: [...(prevTrain ? [prevTrain] : []), labeledId], content: trainText });
    await ctx.register({ path: files.test, role: 'test_set', inputs: [...(prevTest ? [prevTest] : []), labeledId], content: testText });
  },

  async gate(ctx) {
    const files = labelFiles(ctx, ctx.round);
    const s = await readJsonMaybe<CheckSummary>(files.check);
    if (!s) {
      return combine([{ gate: 'labels', verdict: 'fail', reasons: [`${files.check} is missing or unreadable`], figures: {} }]);
    }
    const maxFrac = ctx.view.campaign.stages.label.max_rejected_fraction;
    const reasons: string[] = [];
    let verdict: 'pass' | 'warn' | 'fail' = 'pass';
    for (const m of s.mismatched) {
      verdict = 'fail';
      reasons.push(`${m.task} returned ${m.returned} frame(s) for the ${m.given} it was given`);
    }
    if (s.rejected_count > 0) {
      const frac = s.frames === 0 ? 0 : s.rejected_count / s.frames;
      const first = s.rejected[0];
      const what = `${s.rejected_count} of ${s.frames} labeled frame(s) rejected (${fmt(frac * 100, 3)}%); first: ${first.task} frame ${first.frame}: ${first.reason}`;
      if (frac > maxFrac) {
        verdict = 'fail';
        reasons.push(`${what}; more than max_rejected_fraction ${maxFrac}`);
      } else {
        if (verdict === 'pass') verdict = 'warn';
        reasons.push(`${what}; kept out of the data set`);
      }
    }
    if (verdict === 'pass') reasons.push(`${s.accepted} frame(s) labeled; training set ${s.train_frames}, held out ${s.test_frames}`);
    return combine([{ gate: 'labels', verdict, reasons, figures: { ...s } }], {
      frames: s.frames,
      accepted: s.accepted,
      rejected: s.rejected_count,
      train_frames: s.train_frames,
      test_frames: s.test_frames,
    });
  },
};
