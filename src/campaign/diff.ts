/**
 * The differences between two parsed campaigns (defaults filled in), as key paths with their old and new
 * values: "conditions[2]" (a condition added: no old value), "stages.label.params.smearing",
 * "species[1]". Pure: plain data in, a list out. Mappings are compared key by key (the old file's key order
 * first, then keys only the new one has), lists index by index; anything else by value.
 */
import { formatKeyPath, type KeyPath } from './load.js';

export interface CampaignChange {
  /** The key path, as messages write it (formatKeyPath). */
  path: string;
  /** Absent when the key is new. */
  old?: unknown;
  /** Absent when the key was removed. */
  new?: unknown;
}

function isMapping(v: unknown): v is Record<string, unknown> {
  return v !== null && typeof v === 'object' && !Array.isArray(v);
}

/** Every leaf (or added or removed subtree) where `a` and `b` differ, in document order. */
export function diffCampaigns(a: unknown, b: unknown): CampaignChange[] {
  const out: CampaignChange[] = [];
  walk(a, b, [], out);
  return out;
}

function walk(a: unknown, b: unknown, path: (string | number)[], out: CampaignChange[]): void {
  if (a === undefined && b === undefined) return;
  if (a === undefined || b === undefined) {
    out.push({ path: formatKeyPath(path as KeyPath), ...(a !== undefined ? { old: a } : {}), ...(b !== undefined ? { new: b } : {}) });
    return;
  }
  if (Array.isArray(a) && Array.isArray(b)) {
    for (let k = 0; k < Math.max(a.length, b.length); k++) walk(a[k], b[k], [...path, k], out);
    return;
  }
  if (isMapping(a) && isMapping(b)) {
    const keys = [...Object.keys(a), ...Object.keys(b).filter((k) => !(k in a))];
    for (const k of keys) walk(a[k], b[k], [...path, k], out);
    return;
  }
  if (Object.is(a, b)) return;
  out.push({ path: formatKeyPath(path as KeyPath), old: a, new: b });
}

/**
 * Campaign keys whose change makes data already made differ from what the campaign now asks for: the
 * reference calculation (the label stage's command, parameters, set-up lines and programs), the species,
 * any stage's contact limits, and the held-out fraction. Everything else (more rounds, conditions, the
 * window, the committee, resources, the backend) acts on the future only.
 */
const DATA_KEYS = ['stages.label.command', 'stages.label.params', 'stages.label.setup', 'stages.label.programs', 'species', 'holdout'];

/** Whether a change at this key path affects data already made (see DATA_KEYS). */
export function affectsData(path: string): boolean {
  const under = (p: string, k: string): boolean => p === k || p.startsWith(`${k}.`) || p.startsWith(`${k}[`);
  if (DATA_KEYS.some((k) => under(path, k))) return true;
  return /^stages\.[A-Za-z_]+\.contacts($|[.[])/.test(path);
}
