/**
 * A smooth switching function that takes a pair term to zero between r_on and r_c.
 *
 * S(r) = 1 for r <= r_on, 0 for r >= r_c, and in between the quintic "smootherstep"
 * S = 1 - 10x^3 + 15x^4 - 6x^5 with x = (r - r_on)/(r_c - r_on). S, S' and S'' are continuous
 * everywhere (S' and S'' vanish at both ends), so energies, forces and their first derivatives are
 * continuous: what a constant-energy integrator needs (common practice).
 */

export interface Switch {
  /** Where switching starts (Å). */
  rOn: number;
  /** Where the term reaches zero (Å). */
  rCut: number;
}

export function checkSwitch(sw: Switch, what: string): void {
  if (!(Number.isFinite(sw.rOn) && Number.isFinite(sw.rCut) && sw.rOn >= 0 && sw.rCut > sw.rOn)) {
    throw new RangeError(`${what}: expected 0 <= r_on < r_cut, got r_on=${sw.rOn}, r_cut=${sw.rCut}`);
  }
}

/** S(r) and dS/dr, written into out[0] and out[1]; returns S. */
export function switchValue(r: number, sw: Switch, out?: Float64Array): number {
  let s: number;
  let ds: number;
  if (r <= sw.rOn) {
    s = 1;
    ds = 0;
  } else if (r >= sw.rCut) {
    s = 0;
    ds = 0;
  } else {
    const w = sw.rCut - sw.rOn;
    const x = (r - sw.rOn) / w;
    const x2 = x * x;
    const x3 = x2 * x;
    s = 1 - x3 * (10 - 15 * x + 6 * x2);
    ds = (-30 * x2 * (1 - 2 * x + x2)) / w;
  }
  if (out) {
    out[0] = s;
    out[1] = ds;
  }
  return s;
}
