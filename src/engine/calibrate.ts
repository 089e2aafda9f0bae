/**
 * Spread calibration of a round (I/O around the pure src/select/calibration.ts).
 *
 * Round k (k > 0) labels frames picked from round k-1's trajectories, which carry the committee forces
 * forces_0 ... forces_{M-1} of round k-1's models. Each frame ratchet sent to a label task names where it
 * came from (`source_artifact`, `source_frame`); the label task returns the same frames in the same order
 * (the label gate fails otherwise), so frame j of labeled.xyz is the reference for frame j of frames.xyz.
 * The committee forces are read back from the source trajectory, and the true error is compared with the
 * spread frame by frame. Reads only: safe to repeat.
 */
import { realArray, numberInfo, type Frame } from '../atoms/frame.js';
import { readFrames } from '../atoms/xyz/reader.js';
import { calibrateFrame, summarizeCalibration, calibratedWindow, type CalibrationSample, type CalibrationSummary } from '../select/calibration.js';
import { abs } from './layout.js';
import { stageRecord, type CampaignState } from './state.js';
import { stageOutputs, taskDir } from './stages/common.js';
import type { StageContext } from './stages/types.js';
import type { GateRecord } from './events.js';
import { fmt } from '../gates/verdict.js';

/** Fewest usable frames for a ratio the campaign may scale its window by (this tool's choice). */
export const CALIBRATION_MIN_FRAMES = 10;

export interface RoundCalibration extends CalibrationSummary {
  /** The round whose models' spread was measured (the one before the labeled round). */
  models_round: number;
  /** Frames sent for labeling that could not be paired with their committee forces. */
  unpaired: number;
}

const SENT = 'frames.xyz';
const LABELED = 'labeled.xyz';

async function allFrames(path: string, columns?: string[]): Promise<Frame[]> {
  const out: Frame[] = [];
  for await (const f of readFrames(path, columns ? { columns } : {})) out.push(f);
  return out;
}

/** Measure round `round`'s calibration from its label tasks; null in round 0 (no committee spread yet). */
export async function measureCalibration(ctx: StageContext, round: number): Promise<RoundCalibration | null> {
  if (round === 0) return null;
  const models = ctx.view.committee;
  // Source trajectories of the previous round by artifact id (raw and kept copies).
  const byId = new Map<string, string>();
  for (const file of ['trajectory.xyz', 'trajectory.kept.xyz']) {
    for (const o of stageOutputs(ctx, round - 1, 'simulate', file)) if (o.artifact) byId.set(o.artifact, o.path);
  }
  const samples: CalibrationSample[] = [];
  let unpaired = 0;
  // Wanted: per trajectory path, frame index -> list of (reference forces, atoms).
  const wanted = new Map<string, Map<number, { reference: Float64Array; atoms: number }[]>>();
  const label = stageRecord(ctx.state, round, 'label');
  for (const t of label?.tasks ?? []) {
    const dir = taskDir(ctx, round, 'label', t.name);
    let sent: Frame[];
    let labeled: Frame[];
    try {
      sent = await allFrames(abs(dir, SENT), []);
      labeled = await allFrames(abs(dir, LABELED), ['forces']);
    } catch {
      continue; // the label gate reports unreadable outputs
    }
    if (sent.length !== labeled.length) {
      unpaired += sent.length;
      continue;
    }
    sent.forEach((s, j) => {
      const art = s.info.get('source_artifact');
      const idx = numberInfo(s, 'source_frame');
      const ref = realArray(labeled[j], 'forces', 3);
      const path = typeof art === 'string' ? byId.get(art) : undefined;
      if (path === undefined || idx === undefined || !ref || ref.length !== 3 * s.species.length) {
        unpaired++;
        return;
      }
      let m = wanted.get(path);
      if (!m) wanted.set(path, (m = new Map()));
      const list = m.get(idx) ?? [];
      list.push({ reference: ref, atoms: s.species.length });
      m.set(idx, list);
    });
  }
  const columns = Array.from({ length: models }, (_, k) => `forces_${k}`);
  for (const [path, frames] of wanted) {
    let index = 0;
    let left = frames.size;
    try {
      for await (const f of readFrames(path, { columns, positions: false })) {
        const refs = frames.get(index++);
        if (!refs) continue;
        left--;
        const committee = columns.map((c) => realArray(f, c, 3));
        for (const r of refs) {
          const s = committee.every((c): c is Float64Array => c !== undefined) ? calibrateFrame(committee, r.reference, r.atoms) : null;
          if (s) samples.push(s);
          else unpaired++;
        }
        if (left === 0) break;
      }
    } catch {
      unpaired += left;
      continue;
    }
    unpaired += Math.max(0, left);
  }
  return { ...summarizeCalibration(samples), models_round: round - 1, unpaired };
}

/** The latest calibration recorded up to and including `round` (from the label verdicts), or null. */
export function latestCalibration(state: CampaignState, round: number): (RoundCalibration & { round: number }) | null {
  for (let r = Math.min(round, state.rounds.length - 1); r >= 0; r--) {
    const c = stageRecord(state, r, 'label')?.gate?.figures?.calibration as RoundCalibration | undefined;
    if (c && typeof c.frames === 'number' && c.frames > 0) return { ...c, round: r };
  }
  return null;
}

/**
 * The spread window a round's bands use: the campaign's, or, when `select.window.calibrate` is on and a
 * ratio from at least CALIBRATION_MIN_FRAMES frames exists, the campaign's divided by the latest median ratio.
 */
export function windowFor(ctx: StageContext, round: number): { lower: number; upper: number; ratio: number | null; from_round: number | null } {
  const w = ctx.view.campaign.stages.sample.select.window as { lower: number; upper: number; calibrate?: boolean };
  if (!w.calibrate) return { lower: w.lower, upper: w.upper, ratio: null, from_round: null };
  const c = latestCalibration(ctx.state, round);
  if (!c || c.frames < CALIBRATION_MIN_FRAMES) return { lower: w.lower, upper: w.upper, ratio: null, from_round: null };
  return { ...calibratedWindow(w, c.median), from_round: c.round };
}

/** Above this median ratio the label verdict warns that the committee is overconfident (this tool's choice). */
export const OVERCONFIDENT_RATIO = 2;

/**
 * The calibration of a round as a gate record for the label verdict, and its figures; null in round 0.
 * Never fails: it measures. Warns when the committee is overconfident (median ratio above
 * OVERCONFIDENT_RATIO) and the campaign does not calibrate its window, or when too few frames were paired.
 */
export async function calibrationRecord(ctx: StageContext): Promise<{ record: GateRecord; figures: RoundCalibration } | null> {
  const c = await measureCalibration(ctx, ctx.round);
  if (!c) return null;
  const calibrate = (ctx.view.campaign.stages.sample.select.window as { calibrate?: boolean }).calibrate === true;
  const reasons: string[] = [];
  let verdict: GateRecord['verdict'] = 'pass';
  if (c.frames === 0) {
    reasons.push(`no labeled frame could be paired with the committee forces of round ${c.models_round}: spread not calibrated`);
  } else {
    const line =
      `true force error / committee spread on ${c.frames} labeled frame(s) (models of round ${c.models_round}): ` +
      `median ${fmt(c.median!)}, 90th percentile ${fmt(c.p90!)}; error above spread on ${c.above_one}`;
    reasons.push(line);
    if (c.frames < CALIBRATION_MIN_FRAMES) reasons.push(`fewer than ${CALIBRATION_MIN_FRAMES} frames: too few to scale the window by`);
    else if (c.median! > OVERCONFIDENT_RATIO && !calibrate) {
      verdict = 'warn';
      reasons.push(`the committee is overconfident (its spread understates the error about ${fmt(c.median!)}-fold); consider stages.sample.select.window.calibrate: true`);
    }
  }
  if (c.unpaired > 0) reasons.push(`${c.unpaired} frame(s) could not be paired with their committee forces`);
  return { record: { gate: 'calibration', verdict, reasons, figures: { ...c } }, figures: c };
}
