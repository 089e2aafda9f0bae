import { describe, expect, it } from 'vitest';
import { farthestPointSelect, minimumSeparation, squaredDistance } from '../../src/select/farthest.js';
import { seededRandom } from '../../src/select/random.js';

// Constructed case (invented data, for a selection check only): three clusters of fingerprints, one
// holding 95% of the points. Spread-out selection should take one point from each cluster, where random
// picking mostly takes points from the big cluster.
function clusters(): number[][] {
  const rng = seededRandom('clusters');
  const centres = [
    [0, 0, 0],
    [10, 0, 0],
    [0, 10, 0],
  ];
  const sizes = [190, 5, 5];
  const pts: number[][] = [];
  centres.forEach((c, k) => {
    for (let i = 0; i < sizes[k]; i++) pts.push(c.map((x) => x + 0.3 * rng.normal()));
  });
  return pts;
}

describe('farthest-point selection', () => {
  it('picks one point from each cluster and beats random picking on separation', () => {
    const pts = clusters();
    const chosen = farthestPointSelect(pts, 3, 0);
    expect(new Set(chosen.map((i) => (i < 190 ? 0 : i < 195 ? 1 : 2)))).toEqual(new Set([0, 1, 2]));
    const fps = minimumSeparation(pts, chosen);
    const rng = seededRandom('random picks');
    let sum = 0;
    const trials = 200;
    for (let t = 0; t < trials; t++) {
      const pick = new Set<number>();
      while (pick.size < 3) pick.add(rng.integer(pts.length));
      sum += minimumSeparation(pts, [...pick]);
    }
    expect(fps).toBeGreaterThan(5);
    expect(fps).toBeGreaterThan(3 * (sum / trials));
  });

  it('satisfies the greedy max–min property at every step (checked by brute force)', () => {
    const rng = seededRandom('greedy');
    const pts = Array.from({ length: 60 }, () => [rng.uniform(), rng.uniform(), rng.uniform(), rng.uniform()]);
    const chosen = farthestPointSelect(pts, 10, 7);
    expect(chosen[0]).toBe(7);
    expect(new Set(chosen).size).toBe(10);
    for (let s = 1; s < chosen.length; s++) {
      const prior = chosen.slice(0, s);
      const gap = (i: number) => Math.min(...prior.map((p) => squaredDistance(pts[i], pts[p])));
      const best = Math.max(...pts.map((_, i) => (prior.includes(i) ? -1 : gap(i))));
      expect(gap(chosen[s])).toBe(best);
    }
  });

  it('returns everything when asked for more points than there are, and nothing for k = 0', () => {
    expect(farthestPointSelect([[0], [1]], 5)).toEqual([0, 1]);
    expect(farthestPointSelect([[0], [1]], 0)).toEqual([]);
  });
});
