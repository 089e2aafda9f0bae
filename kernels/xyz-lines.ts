/**
 * The atom lines of an extended XYZ frame, parsed in WebAssembly: the fast path of src/atoms/xyz/atoms.ts.
 *
 * Written in AssemblyScript (compiled by `npm run build:kernels` to kernels/build/xyz-lines.wasm). It handles the
 * common case only and says so when a frame is anything else: the caller then parses the frame again with the
 * TypeScript parser, which produces the same values and the exact error message (file, line, column). So this code
 * never has to describe an error, and its results are checked against that parser (test/atoms/xyz/kernel.test.ts).
 *
 * The caller lays out, in this module's memory (all offsets in bytes):
 *  - the text of the atom lines at [text, limit), followed by a '\n' at limit and at least 16 readable bytes;
 *  - the line program at `ops`: per operation three i32 (kind, width, destination offset), one operation per
 *    property up to the last one kept (species, real or integer columns to keep, columns to skip);
 *  - room for the outputs: one f64 per kept number at its operation's destination (atom a, component k at
 *    dest + 8 (a width + k)), one u8 species id per atom at `speciesOut`.
 * After the operations, `rest` more tokens must end the line (the column count check); rest < 0 skips to the end
 * of the line without counting (plain XYZ allows extra columns).
 *
 * Numbers: a real is [+-] digits [. digits] [(e|E|d|D) [+-] digits] with at least one digit, ended by a byte <= 32,
 * converted exactly when the significand has at most 16 significant digits below 2^53 and the power of ten is at most
 * 22 in magnitude (W. D. Clinger, "How to read floating point numbers accurately", PLDI 1990: one correctly rounded
 * IEEE operation on two exact operands), which is what JavaScript's Number() returns for the same text. Anything else
 * (nan, inf, longer significands, larger exponents, bad text) sends the frame back to the TypeScript parser.
 * An integer is [+-] digits up to 2^53 - 1.
 */

/** Operation kinds (the same numbers as in src/atoms/xyz/kernel.ts). */
const SKIP: i32 = 0;
const REAL: i32 = 1;
const INT: i32 = 2;
const SPECIES: i32 = 5;

/** Distinct species tokens per frame, each at most 8 bytes. */
const MAX_SPECIES: i32 = 255;
/** Species table: per entry the token's bytes as a little-endian u64 (zero-padded) and its length. */
const TABLE: usize = memory.data(16 * 256, 16);

/** Outputs of the last parse. */
export let endOffset: usize = 0;
export let speciesCount: i32 = 0;

/** First offset the caller may use for its own data (after this module's static data). */
export function heapBase(): usize {
  return __heap_base;
}

export function speciesTable(): usize {
  return TABLE;
}

const POW10: StaticArray<f64> = [
  1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20,
  1e21, 1e22,
];
const TWO53: u64 = 9007199254740992;

@inline function isDigit(c: u32): bool {
  return c - 48 < 10;
}

/**
 * Are the eight bytes of x (little-endian: the first byte lowest) all ASCII digits? And their value as a decimal
 * number. The SWAR method of simdjson (D. Lemire and G. Langdale, "Parsing gigabytes of JSON per second", VLDB
 * Journal 28, 2019; as used in their fast_float library; constants cited from memory, checked by the tests against
 * Number()).
 */
@inline function eightDigits(x: u64): bool {
  return ((x & 0xf0f0f0f0f0f0f0f0) | (((x + 0x0606060606060606) & 0xf0f0f0f0f0f0f0f0) >> 4)) == 0x3333333333333333;
}
@inline function eightDigitsValue(x: u64): u64 {
  let v = x - 0x3030303030303030;
  v = v * 10 + (v >> 8);
  v = (((v & 0x000000ff000000ff) * 0x000f424000000064) + (((v >> 16) & 0x000000ff000000ff) * 0x0000271000000001)) >> 32;
  return v & 0xffffffff;
}

/** Parse `natoms` lines; 1 when all are in the fast path, else 0 (the TypeScript parser reads the frame then). */
export function parseLines(text: usize, limit: usize, natoms: i32, ops: usize, nops: i32, rest: i32, speciesOut: usize): i32 {
  let p = text;
  speciesCount = 0;
  const NL = i8x16.splat(10);
  const SP = i8x16.splat(32);
  for (let a: i32 = 0; a < natoms; a++) {
    if (p >= limit) return 0;
    for (let o: i32 = 0; o < nops; o++) {
      const op = ops + <usize>o * 12;
      const kind = load<i32>(op);
      const w = load<i32>(op + 4);
      const dest = <usize>load<u32>(op + 8) + (<usize>(a * w) << 3);
      for (let k: i32 = 0; k < w; k++) {
        // separators: runs of spaces eight at a time, then anything else at or below space but the line end
        let sp = load<u64>(p) ^ 0x2020202020202020;
        while (sp == 0) {
          p += 8;
          sp = load<u64>(p) ^ 0x2020202020202020;
        }
        p += <usize>(ctz(sp) >> 3);
        let c = <u32>load<u8>(p);
        while (c <= 32 && c != 10) c = <u32>load<u8>(++p);
        if (c == 10) return 0; // too few columns
        if (kind == REAL) {
          const neg = c == 45;
          if (neg || c == 43) c = <u32>load<u8>(++p);
          let m: u64 = 0;
          let nd: i32 = 0;
          let digits: i32 = 0;
          let e10: i32 = 0;
          while (isDigit(c)) {
            if (nd > 0 || c != 48) {
              m = m * 10 + <u64>(c - 48);
              nd++;
            }
            digits++;
            c = <u32>load<u8>(++p);
          }
          if (c == 46) {
            ++p;
            // eight digits at a time while there are eight (the fractional part of %16.8f is one block)
            for (;;) {
              const x = load<u64>(p);
              if (!eightDigits(x)) break;
              if (nd > 0) nd += 8;
              else {
                const d = x - 0x3030303030303030;
                if (d != 0) nd = 8 - <i32>(ctz(d) >> 3); // leading zeros are not significant
              }
              m = m * 100000000 + eightDigitsValue(x);
              e10 -= 8;
              digits += 8;
              p += 8;
            }
            c = <u32>load<u8>(p);
            while (isDigit(c)) {
              if (nd > 0 || c != 48) {
                m = m * 10 + <u64>(c - 48);
                nd++;
              }
              e10--;
              digits++;
              c = <u32>load<u8>(++p);
            }
          }
          if (digits == 0) return 0;
          if ((c | 32) == 101 || (c | 32) == 100) {
            c = <u32>load<u8>(++p);
            const eneg = c == 45;
            if (eneg || c == 43) c = <u32>load<u8>(++p);
            let e: i32 = 0;
            let ed: i32 = 0;
            while (isDigit(c)) {
              if (e < 100000) e = e * 10 + <i32>(c - 48);
              ed++;
              c = <u32>load<u8>(++p);
            }
            if (ed == 0) return 0;
            e10 += eneg ? -e : e;
          }
          if (c > 32) return 0;
          let v: f64 = 0;
          if (nd > 0) {
            if (nd > 16 || m >= TWO53 || e10 > 22 || e10 < -22) return 0;
            v = e10 < 0 ? <f64>m / unchecked(POW10[-e10]) : <f64>m * unchecked(POW10[e10]);
          }
          store<f64>(dest + (<usize>k << 3), neg ? -v : v);
        } else if (kind == INT) {
          const neg = c == 45;
          if (neg || c == 43) c = <u32>load<u8>(++p);
          let m: u64 = 0;
          let nd: i32 = 0;
          let digits: i32 = 0;
          while (isDigit(c)) {
            if (nd > 0 || c != 48) {
              if (nd < 17) m = m * 10 + <u64>(c - 48);
              nd++;
            }
            digits++;
            c = <u32>load<u8>(++p);
          }
          if (digits == 0 || c > 32 || nd > 16 || m >= TWO53) return 0;
          const v = <f64>m;
          store<f64>(dest + (<usize>k << 3), neg ? -v : v);
        } else if (kind == SPECIES) {
          const s = p;
          while (c > 32) c = <u32>load<u8>(++p);
          const id = speciesId(s, <i32>(p - s));
          if (id < 0) return 0;
          store<u8>(speciesOut + <usize>a, <u8>id);
        } else {
          while (c > 32) c = <u32>load<u8>(++p);
        }
      }
    }
    // The rest of the line, 16 bytes at a time: bit i of `tm` is set when byte i belongs to a token, of `nlm` when
    // it is the '\n'; a token starts where a set bit follows a clear one (`carry`: the byte before the block).
    // p is just after a token here (or at the line start when there are no operations).
    let n: i32 = 0;
    let carry: u32 = nops > 0 ? 1 : 0;
    for (;;) {
      const v = v128.load(p);
      const nlm = <u32>i8x16.bitmask(i8x16.eq(v, NL));
      let tm = <u32>i8x16.bitmask(i8x16.gt_u(v, SP));
      if (nlm != 0) {
        tm &= (nlm & (0 - nlm)) - 1;
        n += <i32>popcnt(tm & ~((tm << 1) | carry));
        p += <usize>ctz(nlm);
        break;
      }
      n += <i32>popcnt(tm & ~((tm << 1) | carry));
      carry = (tm >> 15) & 1;
      p += 16;
    }
    if (p >= limit) return 0; // the sentinel: the text ended inside this line
    if (rest >= 0 && n != rest) return 0;
    p++;
  }
  endOffset = p;
  return 1;
}

/** The id of the species token [s, s + len) in this frame's table (added when new), or -1 (too long, too many). */
function speciesId(s: usize, len: i32): i32 {
  if (len > 8) return -1;
  // the token's bytes, zero-padded: read 8 bytes and keep len of them
  const mask: u64 = len == 8 ? <u64>-1 : (<u64>1 << (<u64>len << 3)) - 1;
  const key = load<u64>(s) & mask;
  const count = speciesCount;
  for (let q: i32 = 0; q < count; q++) {
    const e = TABLE + (<usize>q << 4);
    if (load<u64>(e) == key && load<i32>(e + 8) == len) return q;
  }
  if (count >= MAX_SPECIES) return -1;
  const e = TABLE + (<usize>count << 4);
  store<u64>(e, key);
  store<i32>(e + 8, len);
  speciesCount = count + 1;
  return count;
}
