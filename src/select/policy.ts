/**
 * The committee-based sample policy: what the sample stage of every round runs (see
 * ../engine/sample-policy.ts for the seam).
 *
 * Round 0: every starting structure gives `perturb.count` perturbed copies (random cell strain and
 * atomic displacements, seeded). Later rounds: each condition's trajectory is read once to compute,
 * per frame, the committee spread (and its band), the contacts check and a structural fingerprint;
 * frames from the first contact violation on are dropped (the run had left physical ground); then at most
 * `select.max_per_condition` informative, sane frames per condition are picked by farthest-point
 * selection, and a second pass writes them out. Every written frame is made by one rule (./hygiene.ts):
 * its structure only, nothing a model or MD program wrote (forces, stress, velocities, charges, user keys...),
 * plus ratchet's provenance keys: `source_artifact` and `source_frame` (so lineage reaches single frames),
 * and `perturbation` (round 0) or `condition` and `committee_spread` (later rounds).
 */
import type { Frame } from '../atoms/frame.js';
import { readFrames } from '../atoms/xyz/reader.js';
import { writeFrames } from '../atoms/xyz/writer.js';
import { bandOf, committeeFrame, COMMITTEE_DEFAULTS, type Band } from '../gates/committee.js';
import { contactsFrame, CONTACTS_DEFAULTS } from '../gates/contacts.js';
import { pairDistanceFingerprint } from './fingerprint.js';
import { forLabeling } from './hygiene.js';
import { perturbFrame } from './perturb.js';
import { pickInformative, type Candidate } from './pick.js';
import { seededRandom } from './random.js';
import type { SampleOutcome, SamplePolicy, SampleRequest } from '../engine/sample-policy.js';

/** The parts of the campaign's sample settings the policy reads (validated by the campaign schema). */
export interface PolicySettings {
  perturb: { count: number; displacement: number; strain: number; seed: number };
  select: {
    window: { lower: number; upper: number };
    max_per_condition: number;
    fingerprint: { cutoff: number; bins: number };
  };
  /** Contact limits for selected frames (the simulate stage's). */
  contacts: { scale: number; hydrogen_scale?: number; min_distance: Record<string, number> };
  species: string[];
}

function settings(params: Record<string, unknown>): PolicySettings {
  const p = params as Partial<PolicySettings>;
  return {
    perturb: p.perturb ?? { count: 10, displacement: 0.05, strain: 0.02, seed: 0 },
    select: p.select ?? {
      window: { lower: COMMITTEE_DEFAULTS.lower, upper: COMMITTEE_DEFAULTS.upper },
      max_per_condition: 50,
      fingerprint: { cutoff: 6, bins: 32 },
    },
    contacts: p.contacts ?? { scale: CONTACTS_DEFAULTS.scale, min_distance: {} },
    species: p.species ?? [],
  };
}

async function perturbStarts(req: SampleRequest, s: PolicySettings): Promise<SampleOutcome> {
  const rng = seededRandom(`perturb:${s.perturb.seed}:${req.seed}`);
  let written = 0;
  let starts = 0;
  async function* frames(): AsyncGenerator<Frame> {
    for (const src of req.sources) {
      let index = 0;
      for await (const f of readFrames(src.path)) {
        starts++;
        for (let c = 0; c < s.perturb.count; c++) {
          const p = perturbFrame(f, { displacement: s.perturb.displacement, strain: s.perturb.strain }, rng);
          written++;
          yield forLabeling(p, { source_artifact: src.artifact, source_frame: index, perturbation: c });
        }
        index++;
      }
    }
  }
  await writeFrames(req.output, frames());
  return {
    frames: written,
    figures: { starts, copies_per_start: s.perturb.count, displacement_A: s.perturb.displacement, strain: s.perturb.strain },
    notes: [`${written} perturbed copies of ${starts} starting structure(s)`],
  };
}

interface TrajectoryScan {
  candidates: Candidate[];
  /** Frame index of each candidate, in file order. */
  frameIndex: number[];
  frames: number;
  bands: Record<Band, number>;
  /** First frame with a contact violation, or null. */
  firstContact: number | null;
}

async function scanTrajectory(path: string, s: PolicySettings, models: number): Promise<TrajectoryScan> {
  const { lower, upper } = s.select.window;
  const candidates: Candidate[] = [];
  const frameIndex: number[] = [];
  const bands: Record<Band, number> = { confident: 0, informative: 0, runaway: 0 };
  let frames = 0;
  let firstContact: number | null = null;
  const columns = Array.from({ length: models }, (_, m) => `forces_${m}`);
  for await (const f of readFrames(path, { columns })) {
    const index = frames++;
    const com = committeeFrame(f, index, { models });
    if (com.missing) throw new Error(`${path}: frame ${index}: ${com.missing}`);
    const band = bandOf(com.bad !== null ? NaN : com.max, lower, upper);
    bands[band]++;
    if (firstContact !== null) continue;
    const con = contactsFrame(f, index, { scale: s.contacts.scale, hydrogenScale: s.contacts.hydrogen_scale, pairLimits: s.contacts.min_distance, maxPerFrame: 1 });
    if (con.violationCount > 0 || con.bad) {
      firstContact = index;
      continue;
    }
    if (band !== 'informative') continue;
    candidates.push({
      spread: com.max,
      band,
      sane: true,
      fingerprint: pairDistanceFingerprint(f, { species: s.species.length ? s.species : [...new Set(f.species)], ...s.select.fingerprint }),
    });
    frameIndex.push(index);
  }
  return { candidates, frameIndex, frames, bands, firstContact };
}

async function selectFromTrajectories(req: SampleRequest, s: PolicySettings): Promise<SampleOutcome> {
  const conditions: NonNullable<SampleOutcome['conditions']> = {};
  const notes: string[] = [];
  const picks: { src: SampleRequest['sources'][number]; indices: Set<number>; spread: Map<number, number> }[] = [];
  for (const src of req.sources) {
    const name = src.condition ?? src.path;
    const scan = await scanTrajectory(src.path, s, req.committee);
    const chosen = pickInformative(scan.candidates, s.select.max_per_condition);
    const indices = new Set(chosen.picked.map((k) => scan.frameIndex[k]));
    const spread = new Map(chosen.picked.map((k) => [scan.frameIndex[k], scan.candidates[k].spread]));
    picks.push({ src, indices, spread });
    conditions[name] = { frames: scan.frames, selected: indices.size, ...scan.bands };
    if (scan.firstContact !== null)
      notes.push(`${name}: frames from ${scan.firstContact} on left out (first contact violation in frame ${scan.firstContact})`);
    if (indices.size === 0 && scan.bands.informative === 0) notes.push(`${name}: no informative frame`);
  }
  let written = 0;
  async function* frames(): AsyncGenerator<Frame> {
    for (const { src, indices, spread } of picks) {
      if (indices.size === 0) continue;
      let index = 0;
      for await (const f of readFrames(src.path)) {
        if (indices.has(index)) {
          // `f` is the raw trajectory frame (every column, the committee's forces_0 ... forces_{M-1} included);
          // the data-hygiene rule (./hygiene.ts) is applied here, once, for every frame sent to labeling.
          written++;
          yield forLabeling(f, { source_artifact: src.artifact, source_frame: index, condition: src.condition ?? '', committee_spread: spread.get(index)! });
        }
        index++;
      }
    }
  }
  await writeFrames(req.output, frames());
  return {
    frames: written,
    conditions,
    figures: { window: s.select.window, max_per_condition: s.select.max_per_condition },
    notes,
  };
}

export const committeeSamplePolicy: SamplePolicy = async (req) => {
  const s = settings(req.params);
  return req.kind === 'start' ? perturbStarts(req, s) : selectFromTrajectories(req, s);
};
