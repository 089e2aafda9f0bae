/**
 * Farthest-point selection (greedy max–min, Gonzalez 1985): pick k points so that each new pick is the one
 * farthest from everything picked so far. It spreads picks over the space of fingerprints instead of
 * clustering them where frames are most numerous.
 */
export function farthestPointSelect(points: ArrayLike<number>[], k: number, first = 0): number[] {
  const n = points.length;
  if (k <= 0 || n === 0) return [];
  if (k >= n) return Array.from({ length: n }, (_, i) => i);
  const nearest = new Float64Array(n).fill(Infinity);
  const picked: number[] = [];
  let current = first;
  for (let step = 0; step < k; step++) {
    picked.push(current);
    nearest[current] = -1;
    let best = -1;
    let bestDistance = -Infinity;
    const p = points[current];
    for (let i = 0; i < n; i++) {
      if (nearest[i] < 0) continue;
      const d = squaredDistance(p, points[i]);
      if (d < nearest[i]) nearest[i] = d;
      if (nearest[i] > bestDistance) {
        bestDistance = nearest[i];
        best = i;
      }
    }
    if (best < 0) break;
    current = best;
  }
  return picked;
}

export function squaredDistance(a: ArrayLike<number>, b: ArrayLike<number>): number {
  if (a.length !== b.length) throw new Error(`fingerprints differ in length (${a.length} and ${b.length})`);
  let s = 0;
  for (let i = 0; i < a.length; i++) {
    const d = a[i] - b[i];
    s += d * d;
  }
  return s;
}

/** The smallest distance between any two of the chosen points: the spread that selection tries to maximise. */
export function minimumSeparation(points: ArrayLike<number>[], chosen: number[]): number {
  let min = Infinity;
  for (let x = 0; x < chosen.length; x++)
    for (let y = x + 1; y < chosen.length; y++)
      min = Math.min(min, Math.sqrt(squaredDistance(points[chosen[x]], points[chosen[y]])));
  return min;
}
