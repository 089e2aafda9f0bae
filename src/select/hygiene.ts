/**
 * Data hygiene: the one rule for what a frame may carry on its way to the labeler and into the data sets.
 *
 * A frame picked from a trajectory carries what the model and the MD program wrote: the committee's forces,
 * the model's energy and stress, velocities, charges, magnetic moments, per-atom energies, keys of a user's
 * own naming. None of it is reference data. A labeler that keeps its input's info and computes only
 * energy and forces (a common pattern) would otherwise hand the model's own stress back as a label, and the
 * potential would be trained on its own predictions. So the rule is an allow-list, not a deny-list:
 *
 * - labeler input: species, positions, cell and pbc, plus ratchet's own provenance keys (PROVENANCE_KEYS);
 *   every other info key and every per-atom array is dropped, whatever its name;
 * - data sets (train.xyz, test.xyz, a round's labeled.xyz): the structure as sent, the reference quantities
 *   the campaign declares (REFERENCE_INFO, REFERENCE_ARRAYS) from the labeled copy, and the provenance keys
 *   of the frame sent; anything else the label program wrote or kept from its input is dropped.
 *
 * Pure functions: frames in, new frames out (the input is never changed).
 */
import type { AtomColumn, Frame, InfoValue } from '../atoms/frame.js';

/**
 * The info keys ratchet itself writes on the frames it sends for labeling (src/select/policy.ts):
 * - `source_artifact`: id of the file the frame was taken from (a starting structure or a trajectory);
 * - `source_frame`: the frame's index in that file (0-based);
 * - `perturbation`: round 0, which perturbed copy of its starting structure this is (0-based);
 * - `condition`: later rounds, the condition whose trajectory the frame comes from;
 * - `committee_spread`: later rounds, the frame's committee spread in eV/Å when it was picked.
 */
export const PROVENANCE_KEYS = ['source_artifact', 'source_frame', 'perturbation', 'condition', 'committee_spread'] as const;

export type ProvenanceKey = (typeof PROVENANCE_KEYS)[number];
export type Provenance = Partial<Record<ProvenanceKey, string | number>>;

/** Reference info keys a labeled frame may bring into the data sets: `energy` (eV), `stress` (eV/Å^3, src/atoms/stress.ts) when present. */
export const REFERENCE_INFO = ['energy', 'stress'] as const;
/** Reference per-atom arrays a labeled frame brings into the data sets: `forces` (eV/Å). */
export const REFERENCE_ARRAYS = ['forces'] as const;

const PROVENANCE = new Set<string>(PROVENANCE_KEYS);

function copyColumn(c: AtomColumn): AtomColumn {
  return { type: c.type, width: c.width, values: Array.isArray(c.values) ? [...c.values] : c.values.slice() };
}

function copyValue(v: InfoValue): InfoValue {
  return Array.isArray(v) ? ([...v] as InfoValue) : v;
}

/** The structure alone: species, positions, cell, pbc (copies); no per-atom arrays, no info. */
export function structureOf(frame: Frame): Frame {
  return {
    species: [...frame.species],
    positions: new Float64Array(frame.positions),
    cell: frame.cell ? new Float64Array(frame.cell) : null,
    pbc: [frame.pbc[0], frame.pbc[1], frame.pbc[2]],
    arrays: new Map(),
    info: new Map(),
  };
}

/**
 * A frame as ratchet sends it to a labeler: its structure and exactly the provenance given (keys outside
 * PROVENANCE_KEYS are refused: a new provenance key must be added to the allow-list, and documented).
 * Whatever provenance the frame already carried is replaced, so a trajectory cannot smuggle in its own.
 */
export function forLabeling(frame: Frame, provenance: Provenance): Frame {
  const out = structureOf(frame);
  for (const [k, v] of Object.entries(provenance)) {
    if (!PROVENANCE.has(k)) throw new Error(`internal: ${k} is not one of ratchet's provenance keys (${PROVENANCE_KEYS.join(', ')})`);
    if (v !== undefined) out.info.set(k, v);
  }
  return out;
}

/**
 * The same rule for a frame that is already on its way (e.g. written by a campaign's own sample command):
 * its structure and those of its info keys that are in PROVENANCE_KEYS. Idempotent:
 * cleanForLabeling(forLabeling(f, p)) has the same content as forLabeling(f, p).
 */
export function cleanForLabeling(frame: Frame): Frame {
  const out = structureOf(frame);
  for (const [k, v] of frame.info) if (PROVENANCE.has(k)) out.info.set(k, copyValue(v));
  return out;
}

/**
 * A frame as it enters the data sets: the structure of the frame SENT (exactly: the labeled copy matched
 * it within the label gate's tolerance, see ./label-match.ts), `energy`, `forces` and, when the labels
 * carry it, `stress` from the labeled copy, and the provenance keys of the frame sent.
 */
export function forDataSet(sent: Frame, labeled: Frame): Frame {
  const out = structureOf(sent);
  for (const k of REFERENCE_INFO) {
    const v = labeled.info.get(k);
    if (v !== undefined) out.info.set(k, copyValue(v));
  }
  for (const [k, v] of sent.info) if (PROVENANCE.has(k)) out.info.set(k, copyValue(v));
  for (const k of REFERENCE_ARRAYS) {
    const c = labeled.arrays.get(k);
    if (c) out.arrays.set(k, copyColumn(c));
  }
  return out;
}

/** The keys of a frame the rule drops (info keys, then per-atom arrays), for reporting. */
export function droppedKeys(frame: Frame, kept: Frame): string[] {
  return [...[...frame.info.keys()].filter((k) => !kept.info.has(k)), ...[...frame.arrays.keys()].filter((k) => !kept.arrays.has(k))];
}
