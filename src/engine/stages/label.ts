/**
 * label: the selected frames in chunks of `frames_per_task`, one task per chunk. The engine writes
 * each chunk into its task directory as frames.xyz (registered as a 'chunk' artifact): the structure
 * of each frame and ratchet's provenance keys only (src/select/hygiene.ts); the command writes
 * labeled.xyz: the same frames, in the same order, with `energy` (eV), `forces` (eV/Å) and, optionally,
 * `stress` (eV/Å^3, src/atoms/stress.ts).
 *
 * Once every task succeeded, collect matches each task's labeled frames to the frames it was sent
 * (same count, order, species, positions and cell within 1e-4 Å: src/select/label-match.ts), checks every
 * labeled frame (energy and forces present and finite, stress well-formed when present, largest force
 * component under `max_force`, no close contacts) and keeps the rejected ones out:
 *   rounds/rK/label/labeled.xyz  this round's accepted frames              (role 'labeled_round')
 *   rounds/rK/label/train.xyz    all rounds' accepted frames not held out  (role 'training_set')
 *   rounds/rK/label/test.xyz     all rounds' accepted frames held out      (role 'test_set')
 *   rounds/rK/label/check.json   what was rejected and why (its figures go into the verdict)
 * A frame in these files is the frame SENT (its structure, exactly, and provenance) with the reference
 * quantities of its labeled copy (energy, forces, stress when present): nothing else the label program
 * wrote or kept reaches them (the task's own labeled.xyz stays as written). Held-out frames are chosen by a
 * hash of the structure sent (src/select/holdout.ts), so a frame is test or train in every round alike.
 * Gate: fails when a task's frames do not match the frames it was given (a task with such a mismatch gives
 * no frame to the data sets), or when more than `max_rejected_fraction` of the frames were rejected;
 * warns for fewer.
 */
import { createHash } from 'node:crypto';
import { readFile } from 'node:fs/promises';
import type { Frame } from '../../atoms/frame.js';
import { nearest } from '../../campaign/suggest.js';
import { stressVoigt } from '../../atoms/stress.js';
import { readFrames } from '../../atoms/xyz/reader.js';
import { formatFrame } from '../../atoms/xyz/writer.js';
import { contactsFrame } from '../../gates/contacts.js';
import { fmt } from '../../gates/verdict.js';
import { artifactId } from '../../ledger/artifacts.js';
import { isHeldOut } from '../../select/holdout.js';
import { cleanForLabeling, droppedKeys, forDataSet } from '../../select/hygiene.js';
import { matchFrames, type MatchProblem } from '../../select/label-match.js';
import { taskName, stageId } from '../ids.js';
import { abs, stageDirRel } from '../layout.js';
import { exists, readJsonMaybe, writeFileAtomic } from '../fsutil.js';
import { SAMPLE_OUTPUT } from './sample.js';
import { calibrationRecord } from '../calibrate.js';
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
  contacts: { scale: number; hydrogenScale?: number; pairLimits: Record<string, number> };
}

/** " found A, B; did you mean A?": what a frame has instead of `wanted`, and the closest name. */
function foundInstead(wanted: string, found: string[], what: string): string {
  if (found.length === 0) return `; found no ${what}`;
  const close = nearest(wanted, found) ?? found.find((k) => k.toLowerCase().includes(wanted.slice(0, 5)));
  const shown = found.length > 12 ? `${found.slice(0, 12).join(', ')} and ${found.length - 12} more` : found.join(', ');
  return `; found ${what} ${shown}${close ? `; did you mean ${close}?` : ''}`;
}

/** Why a labeled frame cannot be used, or null when it can. Pure. */
export function labelProblem(frame: Frame, index: number, o: LabelCheckOptions): string | null {
  const ev = frame.info.get('energy');
  if (ev === undefined) return `no energy (info key \`energy\`, eV)${foundInstead('energy', [...frame.info.keys()], 'info keys')}`;
  if (typeof ev !== 'number') return `energy (info key \`energy\`, eV) is not a number: found ${JSON.stringify(ev)}`;
  if (!Number.isFinite(ev)) return `non-finite energy ${ev}`;
  const col = frame.arrays.get('forces');
  if (!col) return `no forces (per-atom real array \`forces\`, 3 components, eV/Å)${foundInstead('forces', [...frame.arrays.keys()], 'per-atom arrays')}`;
  if (col.type !== 'R' || col.width !== 3) return `forces must be a per-atom real array of 3 components (eV/Å), found ${col.type}:${col.width}`;
  const f = col.values as Float64Array;
  if (frame.info.has('stress')) {
    let s: Float64Array | undefined;
    try {
      s = stressVoigt(frame);
    } catch (err) {
      return (err as Error).message;
    }
    if (s && !s.every(Number.isFinite)) return 'non-finite stress (info key `stress`, eV/Å^3)';
  }
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
  const c = contactsFrame(frame, index, { scale: o.contacts.scale, hydrogenScale: o.contacts.hydrogenScale, pairLimits: o.contacts.pairLimits, maxPerFrame: 1 });
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

interface Mismatch {
  task: string;
  given: number;
  returned: number;
  kind?: MatchProblem['kind'];
  /** The returned frame concerned, or null for the file as a whole (a missing frame). */
  frame?: number | null;
  reason?: string;
}

interface CheckSummary {
  frames: number;
  accepted: number;
  rejected_count: number;
  /** At most 100, in task and frame order. */
  rejected: Rejected[];
  /** Tasks whose labeled frames do not match the frames they were given (count, order or structure). */
  mismatched: Mismatch[];
  /** Keys the labeled frames carried that do not reach the data sets (sorted). */
  dropped_keys: string[];
  train_frames: number;
  test_frames: number;
  /** A campaign revision's relabel choice (revision_decided): this round labeled earlier rounds' frames again. */
  relabeled?: { frames: number; rounds: number[]; revision: number; note: string };
}

/** The frames of earlier rounds' labeled.xyz that this round labels again (a revision's relabel choice), as sent. */
async function relabelFrames(ctx: StageContext): Promise<{ texts: string[]; inputs: string[]; rounds: number[]; revision: number } | undefined> {
  const r = ctx.state.relabel?.get(ctx.round);
  if (!r) return undefined;
  const texts: string[] = [];
  const inputs: string[] = [];
  for (const k of r.rounds) {
    const p = labelFiles(ctx, k).labeled;
    if (!(await exists(p))) continue;
    const id = ctx.artifactId(p);
    if (id) inputs.push(id);
    // Structure and provenance only: the old labels do not travel with the frames.
    for await (const f of readFrames(p)) texts.push(formatFrame(cleanForLabeling(f)));
  }
  return { texts, inputs, rounds: r.rounds, revision: r.number };
}

function relabelNote(n: number, rounds: number[], revision: number): string {
  const which = rounds.length === 0 ? 'no round' : rounds.length === 1 ? `round r${rounds[0]}` : `rounds r${rounds[0]}..r${rounds[rounds.length - 1]}`;
  return `relabeled ${n} frames of ${which} under revision ${revision}; earlier labels dropped from the data sets`;
}

async function allFrames(path: string): Promise<Frame[]> {
  const out: Frame[] = [];
  for await (const f of readFrames(path)) out.push(f);
  return out;
}

export const label: StageDef = {
  stage: 'label',

  async plan(ctx): Promise<StagePlan> {
    const selected = stageOutputs(ctx, ctx.round, 'sample', SAMPLE_OUTPUT)[0];
    if (!selected?.artifact) throw new Error(`internal: ${stageId(ctx.round, 'sample')} has no registered frames`);
    const texts: string[] = [];
    // The data-hygiene rule once more, for frames a campaign's own sample command wrote: structure and
    // provenance keys only (the built-in sampling already wrote them so; cleaning again changes nothing).
    for await (const f of readFrames(selected.path)) texts.push(formatFrame(cleanForLabeling(f)));
    const own = texts.length;
    // A campaign revision's relabel choice: the earlier rounds' labeled frames are labeled again here.
    const again = await relabelFrames(ctx);
    if (again) texts.push(...again.texts);
    const sources = [selected.artifact, ...(again?.inputs ?? [])];
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
      artifacts.push({ path, role: 'chunk', inputs: sources, content, written: true });
      tasks.push({
        name,
        seed: deriveSeed(ctx.view.seed, `r${ctx.round}/label/${name}`),
        inputs: { frames: { path, artifact: id } },
        params: { ...stageParams, first_frame: k * per, frames: Math.min(per, texts.length - k * per) },
        outputs: { labeled: { path: LABEL_OUTPUT, role: 'labeled' } },
        files: { [LABEL_INPUT]: content },
      });
    }
    const notes = [`${texts.length} frames in ${count} task(s) of up to ${per}`];
    if (again) notes.push(`${own} selected + ${relabelNote(again.texts.length, again.rounds, again.revision)}`);
    return { tasks, inputs: sources, artifacts, notes };
  },

  async collect(ctx) {
    const c = ctx.view.campaign;
    const opts: LabelCheckOptions = {
      maxForce: c.stages.label.max_force,
      contacts: { scale: c.stages.label.contacts.scale, hydrogenScale: c.stages.label.contacts.hydrogen_scale, pairLimits: c.stages.label.contacts.min_distance },
    };
    const outs = stageOutputs(ctx, ctx.round, 'label', LABEL_OUTPUT);
    const accepted: string[] = [];
    const train: string[] = [];
    const test: string[] = [];
    const summary: CheckSummary = { frames: 0, accepted: 0, rejected_count: 0, rejected: [], mismatched: [], dropped_keys: [], train_frames: 0, test_frames: 0 };
    const dropped = new Set<string>();
    for (const o of outs) {
      const sent = await allFrames(abs(taskDir(ctx, ctx.round, 'label', o.name), LABEL_INPUT));
      const got = await allFrames(o.path);
      summary.frames += got.length;
      const mismatch = matchFrames(sent, got);
      if (mismatch) {
        // Labels that cannot be tied to the frames sent are not used at all (the gate fails).
        summary.mismatched.push({ task: o.task, given: sent.length, returned: got.length, ...mismatch });
        continue;
      }
      got.forEach((f, index) => {
        const problem = labelProblem(f, index, opts);
        if (problem) {
          summary.rejected_count++;
          if (summary.rejected.length < 100) summary.rejected.push({ task: o.task, frame: index, reason: problem });
          return;
        }
        const kept = forDataSet(sent[index], f);
        for (const k of droppedKeys(f, kept)) dropped.add(k);
        const text = formatFrame(kept);
        accepted.push(text);
        if (isHeldOut(sent[index], c.holdout)) test.push(text);
        else train.push(text);
      });
    }
    summary.dropped_keys = [...dropped].sort();
    summary.accepted = accepted.length;
    const files = labelFiles(ctx, ctx.round);
    // After a revision's relabel choice, this round's labels alone make the data sets: the earlier labels,
    // made under the earlier settings, are dropped (their frames were labeled again here).
    const again = ctx.state.relabel?.get(ctx.round);
    if (again) {
      let n = 0;
      for (const k of again.rounds) {
        const p = labelFiles(ctx, k).labeled;
        if (await exists(p)) for await (const _ of readFrames(p)) n++;
      }
      summary.relabeled = { frames: n, rounds: again.rounds, revision: again.number, note: relabelNote(n, again.rounds, again.number) };
    }
    const prev = ctx.round > 0 && !again ? labelFiles(ctx, ctx.round - 1) : undefined;
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
      // Older check files have no reason: only the counts.
      const what = m.reason ?? `returned ${m.returned} frame(s) for the ${m.given} it was given`;
      reasons.push(m.kind === 'structure' ? `${m.task} frame ${m.frame}: ${what}` : `${m.task}: ${what}`);
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
    if (s.relabeled) reasons.push(s.relabeled.note);
    // The committee's spread against the true error on the frames just labeled (src/engine/calibrate.ts).
    const cal = await calibrationRecord(ctx);
    const v = combine([{ gate: 'labels', verdict, reasons, figures: { ...s } }, ...(cal ? [cal.record] : [])], {
      frames: s.frames,
      accepted: s.accepted,
      rejected: s.rejected_count,
      train_frames: s.train_frames,
      test_frames: s.test_frames,
      ...(cal ? { calibration: cal.figures } : {}),
      ...(s.relabeled ? { relabeled: s.relabeled } : {}),
    });
    // The relabel note goes with the one line that sums the stage up.
    if (s.relabeled) v.summary = `${s.accepted} frame(s) labeled; ${s.relabeled.note}`;
    return v;
  },
};
