/**
 * The nearest valid word for a typo (unknown keys, enum values), by Levenshtein distance.
 */
import { distance } from 'fastest-levenshtein';

/** Lower case, with "-" and spaces read as "_" (so "frames-per-task" finds "frames_per_task"). */
function normalise(word: string): string {
  return word.toLowerCase().replace(/[-\s]+/g, '_');
}

/**
 * The candidate closest to `word`, or undefined when none is close enough to be a plausible typo.
 * Close enough: at most max(1, floor(length / 3)) edits (insertions, deletions, substitutions) after
 * normalising case and separators. Ties go to the earlier candidate.
 */
export function nearest(word: string, candidates: readonly string[]): string | undefined {
  const w = normalise(word);
  if (w.length === 0) return undefined;
  let best: string | undefined;
  let bestDistance = Infinity;
  for (const c of candidates) {
    const d = distance(w, normalise(c));
    if (d < bestDistance) {
      best = c;
      bestDistance = d;
    }
  }
  const allowed = Math.max(1, Math.floor(w.length / 3));
  return bestDistance <= allowed ? best : undefined;
}
