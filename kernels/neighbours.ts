/**
 * Cell-list neighbour search in WebAssembly: the fast path of forEachPair in src/atoms/neighbours.ts.
 *
 * Written in AssemblyScript (compiled by `npm run build:kernels` to kernels/build/neighbours.wasm). The TypeScript
 * side makes the plan (bins, padding, stencil, image shifts; see neighbours.ts for the method and why it is exact for
 * any cell) and lays it out in this module's memory; this module bins the atoms and their periodic images and lists
 * the pairs closer than the cutoff. It is a line-by-line port of the TypeScript loops (wrapAndBin, countImages,
 * placeImages, pairLoop), with the same floating-point operations in the same order, so the pairs, their order and
 * every distance and vector are bit for bit those of the TypeScript code (test/atoms/neighbours-kernel.test.ts).
 *
 * Plan block at `plan` (offsets in bytes): f64 h[9] @0, inv[9] @72, origin[3] @144, scale[3] @168 (bins per unit of
 * fractional coordinate); i32 per[3] @192, nb[3] @204, g[3] @216, lo[3] @228, number of stencil rows @240;
 * then the stencil rows at `rows` (i32 pairs: first and last linear bin offset; row 0 starts at the bin itself, see
 * StencilRows in neighbours.ts) and the image shift ranges (i32, 2 per interior bin of each axis) at `shifts`.
 */

/** Offsets within the plan block. */
const H: usize = 0;
const INV: usize = 72;
const ORIGIN: usize = 144;
const SCALE: usize = 168;
const PER: usize = 192;
const NB: usize = 204;
const G: usize = 216;
const LO: usize = 228;
const NS: usize = 240;

@inline function f(base: usize, k: i32): f64 {
  return load<f64>(base + (<usize>k << 3));
}
@inline function i(base: usize, k: i32): i32 {
  return load<i32>(base + (<usize>k << 2));
}
@inline function setf(base: usize, k: i32, v: f64): void {
  store<f64>(base + (<usize>k << 3), v);
}
@inline function seti(base: usize, k: i32, v: i32): void {
  store<i32>(base + (<usize>k << 2), v);
}

export function heapBase(): usize {
  return __heap_base;
}

/**
 * Wrap the atoms into the cell (wrapped Cartesian positions at `wrapped`), give each its interior bin per axis (`bin`,
 * 3 i32 per atom), count the entries (atoms and images) per extended bin into binStart[bin + 1] (binStart zeroed
 * here, nbins + 1 i32), turn the counts into starts, copy them to `fill`, and return the number of entries.
 */
export function bin(plan: usize, shifts: usize, pos: usize, n: i32, wrapped: usize, binOf: usize, binStart: usize, fill: usize): i32 {
  const h = plan + H, inv = plan + INV;
  const p0 = i(plan + PER, 0) != 0, p1 = i(plan + PER, 1) != 0, p2 = i(plan + PER, 2) != 0;
  const or0 = f(plan + ORIGIN, 0), or1 = f(plan + ORIGIN, 1), or2 = f(plan + ORIGIN, 2);
  const sc0 = f(plan + SCALE, 0), sc1 = f(plan + SCALE, 1), sc2 = f(plan + SCALE, 2);
  const nb0 = i(plan + NB, 0), nb1 = i(plan + NB, 1), nb2 = i(plan + NB, 2);
  const g0 = i(plan + G, 0), g1 = i(plan + G, 1), g2 = i(plan + G, 2);
  const lo0 = i(plan + LO, 0), lo1 = i(plan + LO, 1), lo2 = i(plan + LO, 2);
  const h0 = f(h, 0), h1 = f(h, 1), h2 = f(h, 2), h3 = f(h, 3), h4 = f(h, 4), h5 = f(h, 5), h6 = f(h, 6), h7 = f(h, 7), h8 = f(h, 8);
  const i0 = f(inv, 0), i1 = f(inv, 1), i2 = f(inv, 2), i3 = f(inv, 3), i4 = f(inv, 4), i5 = f(inv, 5), i6 = f(inv, 6), i7 = f(inv, 7), i8 = f(inv, 8);
  for (let a: i32 = 0; a < n; a++) {
    const x = f(pos, 3 * a), y = f(pos, 3 * a + 1), z = f(pos, 3 * a + 2);
    let s0 = x * i0 + y * i3 + z * i6;
    let s1 = x * i1 + y * i4 + z * i7;
    let s2 = x * i2 + y * i5 + z * i8;
    let w0: f64 = 0, w1: f64 = 0, w2: f64 = 0;
    if (p0) { w0 = Math.floor(s0); s0 -= w0; }
    if (p1) { w1 = Math.floor(s1); s1 -= w1; }
    if (p2) { w2 = Math.floor(s2); s2 -= w2; }
    setf(wrapped, 3 * a, x - (w0 * h0 + w1 * h3 + w2 * h6));
    setf(wrapped, 3 * a + 1, y - (w0 * h1 + w1 * h4 + w2 * h7));
    setf(wrapped, 3 * a + 2, z - (w0 * h2 + w1 * h5 + w2 * h8));
    // clamped: rounding can put a coordinate a hair outside its range
    let b0 = i32(Math.floor((s0 - or0) * sc0)), b1 = i32(Math.floor((s1 - or1) * sc1)), b2 = i32(Math.floor((s2 - or2) * sc2));
    b0 = b0 < 0 ? 0 : b0 >= nb0 ? nb0 - 1 : b0;
    b1 = b1 < 0 ? 0 : b1 >= nb1 ? nb1 - 1 : b1;
    b2 = b2 < 0 ? 0 : b2 >= nb2 ? nb2 - 1 : b2;
    seti(binOf, 3 * a, b0); seti(binOf, 3 * a + 1, b1); seti(binOf, 3 * a + 2, b2);
  }
  const nbins = g0 * g1 * g2;
  memory.fill(binStart, 0, (<usize>(nbins + 1)) << 2);
  const r0 = shifts, r1 = r0 + (<usize>(2 * nb0) << 2), r2 = r1 + (<usize>(2 * nb1) << 2);
  const g12 = g1 * g2;
  let total: i32 = 0;
  for (let a: i32 = 0; a < n; a++) {
    const b0 = i(binOf, 3 * a), b1 = i(binOf, 3 * a + 1), b2 = i(binOf, 3 * a + 2);
    const u1 = i(r0, 2 * b0 + 1), v0 = i(r1, 2 * b1), v1 = i(r1, 2 * b1 + 1), w0 = i(r2, 2 * b2), w1 = i(r2, 2 * b2 + 1);
    for (let S0 = i(r0, 2 * b0); S0 <= u1; S0++) {
      const e0 = (b0 + S0 * nb0 + lo0) * g12;
      for (let S1 = v0; S1 <= v1; S1++) {
        const e1 = e0 + (b1 + S1 * nb1 + lo1) * g2 + b2 + lo2 + 1;
        for (let S2 = w0; S2 <= w1; S2++) {
          const e = e1 + S2 * nb2;
          seti(binStart, e, i(binStart, e) + 1);
          total++;
        }
      }
    }
  }
  for (let b: i32 = 0; b < nbins; b++) seti(binStart, b + 1, i(binStart, b + 1) + i(binStart, b));
  memory.copy(fill, binStart, (<usize>nbins) << 2);
  return total;
}

/** Place every entry (coordinates at `xyz`, atom index at `atom`) in extended-bin order (counting sort, pass 2). */
export function place(plan: usize, shifts: usize, n: i32, wrapped: usize, binOf: usize, fill: usize, xyz: usize, atom: usize): void {
  const h = plan + H;
  const nb0 = i(plan + NB, 0), nb1 = i(plan + NB, 1), nb2 = i(plan + NB, 2);
  const g1 = i(plan + G, 1), g2 = i(plan + G, 2);
  const lo0 = i(plan + LO, 0), lo1 = i(plan + LO, 1), lo2 = i(plan + LO, 2);
  const h0 = f(h, 0), h1 = f(h, 1), h2 = f(h, 2), h3 = f(h, 3), h4 = f(h, 4), h5 = f(h, 5), h6 = f(h, 6), h7 = f(h, 7), h8 = f(h, 8);
  const r0 = shifts, r1 = r0 + (<usize>(2 * nb0) << 2), r2 = r1 + (<usize>(2 * nb1) << 2);
  const g12 = g1 * g2;
  for (let a: i32 = 0; a < n; a++) {
    const b0 = i(binOf, 3 * a), b1 = i(binOf, 3 * a + 1), b2 = i(binOf, 3 * a + 2);
    const px = f(wrapped, 3 * a), py = f(wrapped, 3 * a + 1), pz = f(wrapped, 3 * a + 2);
    const u1 = i(r0, 2 * b0 + 1), v0 = i(r1, 2 * b1), v1 = i(r1, 2 * b1 + 1), w0 = i(r2, 2 * b2), w1 = i(r2, 2 * b2 + 1);
    for (let S0 = i(r0, 2 * b0); S0 <= u1; S0++) {
      const e0 = (b0 + S0 * nb0 + lo0) * g12;
      for (let S1 = v0; S1 <= v1; S1++) {
        const e1 = e0 + (b1 + S1 * nb1 + lo1) * g2 + b2 + lo2;
        for (let S2 = w0; S2 <= w1; S2++) {
          const e = e1 + S2 * nb2;
          const slot = i(fill, e);
          seti(fill, e, slot + 1);
          const T0 = <f64>S0, T1 = <f64>S1, T2 = <f64>S2;
          setf(xyz, 3 * slot, px + T0 * h0 + T1 * h3 + T2 * h6);
          setf(xyz, 3 * slot + 1, py + T0 * h1 + T1 * h4 + T2 * h7);
          setf(xyz, 3 * slot + 2, pz + T0 * h2 + T1 * h5 + T2 * h8);
          seti(atom, slot, a);
        }
      }
    }
  }
}

/** Pairs written by the last call of pairs(). */
export let pairCount: i32 = 0;
/** Close pairs found by the last call of closePairs() (all of them, also those beyond the output capacity). */
export let closeCount: i32 = 0;

/**
 * List the pairs closer than `cutoff` found from interior bins `from`, from + 1, ... (bins numbered (b0 nb1 + b1) nb2
 * + b2), in the TypeScript pair loop's order: i, j (i <= j), distance, and (dx, dy, dz) = r_j + shift - r_i.
 * Stops after the bin that takes the count to `soft` or more; returns the next bin to do (nb0 nb1 nb2 when all are
 * done), or -1 when one bin alone would overflow `hard` (the caller makes room and calls again from the same bin).
 */
export function pairs(
  plan: usize, rows: usize, xyz: usize, atom: usize, binStart: usize, cutoff: f64, from: i32, soft: i32, hard: i32,
  outI: usize, outJ: usize, outD: usize, outV: usize,
): i32 {
  return walk(false, plan, rows, xyz, atom, binStart, cutoff, from, soft, hard, outI, outJ, outD, outV, 0, 0, 0, 0, 0, 0);
}

/**
 * The first pass of minimumDistanceByGroup with contact limits (group: one i32 per atom), over all interior bins
 * (pairs closer than `cutoff`, in pairLoop's order): per group pair (g <= h) the closest pair, ties broken by the lower
 * (i, j), into best (f64 distances, i32 atoms; the caller fills them with Infinity and -1 first); and every pair closer
 * than limits[group(i) ng + group(j)] into the close lists (i <= j, distance), at most `cap` of them (closeCount counts
 * all).
 */
export function closePairs(
  plan: usize, rows: usize, xyz: usize, atom: usize, binStart: usize, cutoff: f64, group: usize, ng: i32, limits: usize,
  bestD: usize, bestI: usize, bestJ: usize, closeI: usize, closeJ: usize, closeD: usize, cap: i32,
): void {
  closeCount = 0;
  walk(true, plan, rows, xyz, atom, binStart, cutoff, 0, i32.MAX_VALUE, cap, closeI, closeJ, closeD, 0, group, ng, limits, bestD, bestI, bestJ);
}

/** The pair loop of both: `grouped` false lists pairs (pairs()), true keeps group minima and close pairs (closePairs()). */
function walk(
  grouped: bool, plan: usize, rows: usize, xyz: usize, atom: usize, binStart: usize, cutoff: f64, from: i32, soft: i32, hard: i32,
  outI: usize, outJ: usize, outD: usize, outV: usize, group: usize, ng: i32, limits: usize, bestD: usize, bestI: usize, bestJ: usize,
): i32 {
  const nb0 = i(plan + NB, 0), nb1 = i(plan + NB, 1), nb2 = i(plan + NB, 2);
  const g1 = i(plan + G, 1), g2 = i(plan + G, 2);
  const lo0 = i(plan + LO, 0), lo1 = i(plan + LO, 1), lo2 = i(plan + LO, 2);
  const nr = i(plan + NS, 0);
  const c2 = cutoff * cutoff;
  const total = nb0 * nb1 * nb2;
  let count: i32 = 0;
  pairCount = 0;
  let lin = from;
  let b2 = from % nb2;
  let b1 = (from / nb2) % nb1;
  let b0 = from / (nb1 * nb2);
  for (; b0 < nb0; b0++, b1 = 0) {
    for (; b1 < nb1; b1++, b2 = 0) {
      const rowBase = ((b0 + lo0) * g1 + (b1 + lo1)) * g2 + lo2;
      for (; b2 < nb2; b2++, lin++) {
        if (count >= soft) {
          pairCount = count;
          return lin;
        }
        const bin = rowBase + b2;
        const start = i(binStart, bin), end = i(binStart, bin + 1);
        if (start == end) continue;
        for (let r: i32 = 0; r < nr; r++) {
          // row 0 begins with the bin itself: each atom against the atoms after it
          const s0 = r == 0 ? -1 : i(binStart, bin + i(rows, 2 * r));
          const e = i(binStart, bin + i(rows, 2 * r + 1) + 1);
          if (s0 == e) continue;
          for (let a = start; a < end; a++) {
            const xi = f(xyz, 3 * a), yi = f(xyz, 3 * a + 1), zi = f(xyz, 3 * a + 2);
            for (let b = r == 0 ? a + 1 : s0; b < e; b++) {
              const dx = f(xyz, 3 * b) - xi, dy = f(xyz, 3 * b + 1) - yi, dz = f(xyz, 3 * b + 2) - zi;
              const d2 = dx * dx + dy * dy + dz * dz;
              if (d2 < c2) {
                if (grouped) {
                  count = close(i(atom, a), i(atom, b), Math.sqrt(d2), count, group, ng, limits, bestD, bestI, bestJ, outI, outJ, outD, hard);
                } else {
                  if (count >= hard) return -1;
                  emit(count++, i(atom, a), i(atom, b), Math.sqrt(d2), dx, dy, dz, outI, outJ, outD, outV);
                }
              }
            }
          }
        }
      }
    }
  }
  if (grouped) closeCount = count;
  else pairCount = count;
  return total;
}

@inline function emit(q: i32, ia: i32, ib: i32, d: f64, dx: f64, dy: f64, dz: f64, outI: usize, outJ: usize, outD: usize, outV: usize): void {
  setf(outD, q, d);
  if (ia <= ib) {
    seti(outI, q, ia); seti(outJ, q, ib);
    setf(outV, 3 * q, dx); setf(outV, 3 * q + 1, dy); setf(outV, 3 * q + 2, dz);
  } else {
    seti(outI, q, ib); seti(outJ, q, ia);
    setf(outV, 3 * q, -dx); setf(outV, 3 * q + 1, -dy); setf(outV, 3 * q + 2, -dz);
  }
}

/** One pair (atoms ia, ib in either order): the group minimum (record in neighbours.ts) and the limit check. */
function close(
  ia: i32, ib: i32, d: f64, count: i32, group: usize, ng: i32, limits: usize,
  bestD: usize, bestI: usize, bestJ: usize, closeI: usize, closeJ: usize, closeD: usize, cap: i32,
): i32 {
  // the visitor's order: i <= j
  const vi = ia <= ib ? ia : ib, vj = ia <= ib ? ib : ia;
  const gi = i(group, vi), gj = i(group, vj);
  let p = gi, q = gj;
  let a = vi, b = vj;
  if (p > q) {
    const t = p; p = q; q = t;
    a = vj; b = vi;
  }
  const key = p * ng + q;
  const cur = f(bestD, key);
  if (d < cur || (d == cur && (a < i(bestI, key) || (a == i(bestI, key) && b < i(bestJ, key))))) {
    setf(bestD, key, d); seti(bestI, key, a); seti(bestJ, key, b);
  }
  const lim = f(limits, gi * ng + gj);
  if (d < lim) {
    if (count < cap) {
      seti(closeI, count, vi); seti(closeJ, count, vj); setf(closeD, count, d);
    }
    count++;
  }
  return count;
}
