/**
 * Number parsing on bytes, exactly as JavaScript's Number() would parse the same text.
 *
 * Fast path (W. D. Clinger, "How to read floating point numbers accurately", PLDI 1990):
 * when the decimal significand has at most 16 digits and is below 2^53 it is an exact double, and
 * when the power of ten is at most 22 in magnitude it is exact too (10^22 = 5^22 * 2^22, 5^22 < 2^53); one IEEE
 * multiplication or division of two exact operands is correctly rounded, which is what Number() returns.
 * Anything else (longer significands, larger exponents, nan/inf) goes to Number() on the token text.
 *
 * Accepted real syntax: [+-] digits [. digits] [(e|E|d|D) [+-] digits], also ".5" and "5.";
 * a Fortran-style D exponent is read as E. Also nan, inf, infinity in any case with an optional sign
 * (what Python and Fortran print for non-finite values). Hex, binary, "_" separators and empty
 * exponents are refused (Number() would accept hex; extended XYZ does not).
 */

const POW10 = [
  1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20,
  1e21, 1e22,
];
const TWO53 = 9007199254740992;

/** Result slots of parseRealAt / parseIntAt (avoids allocating a result object per number). */
export const cursor = { end: 0, ok: true };

/** Is the byte a token separator (anything at or below space: space, tab, CR, LF, other controls)? */
export function isSep(c: number): boolean {
  return c <= 32;
}

/**
 * Parse the real number token starting at buf[p] (p must point at a non-separator byte).
 * The token ends at the first byte <= 32 (or the end of buf). On return cursor.end is the
 * offset after the token and cursor.ok says whether the token was a valid real.
 */
export function parseRealAt(buf: Uint8Array, p: number): number {
  const start = p;
  let c = buf[p];
  let neg = false;
  if (c === 45) {
    neg = true;
    c = buf[++p];
  } else if (c === 43) {
    c = buf[++p];
  }
  let mant = 0;
  let nd = 0; // significant digits (after leading zeros)
  let digits = 0; // all mantissa digits
  let exp10 = 0;
  while (c >= 48 && c <= 57) {
    if (nd > 0 || c !== 48) {
      mant = mant * 10 + (c - 48);
      nd++;
    }
    digits++;
    c = buf[++p];
  }
  if (c === 46) {
    c = buf[++p];
    while (c >= 48 && c <= 57) {
      if (nd > 0 || c !== 48) {
        mant = mant * 10 + (c - 48);
        nd++;
      }
      exp10--;
      digits++;
      c = buf[++p];
    }
  }
  if (digits === 0) return slowReal(buf, start, p);
  if (c === 101 || c === 69 || c === 100 || c === 68) {
    c = buf[++p];
    let eneg = false;
    if (c === 45) {
      eneg = true;
      c = buf[++p];
    } else if (c === 43) {
      c = buf[++p];
    }
    let e = 0;
    let ed = 0;
    while (c >= 48 && c <= 57) {
      if (e < 100000) e = e * 10 + (c - 48);
      ed++;
      c = buf[++p];
    }
    if (ed === 0) return slowReal(buf, start, p);
    exp10 += eneg ? -e : e;
  }
  if (c > 32) return slowReal(buf, start, p);
  cursor.end = p;
  cursor.ok = true;
  if (mant === 0) return neg ? -0 : 0;
  if (nd > 16 || mant >= TWO53 || exp10 > 22 || exp10 < -22) return slowReal(buf, start, p);
  const v = exp10 < 0 ? mant / POW10[-exp10] : mant * POW10[exp10];
  return neg ? -v : v;
}

const REAL_TEXT = /^[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eEdD][+-]?[0-9]+)?$/;
const NONFINITE_TEXT = /^([+-]?)(nan|inf|infinity)$/i;

/** Parse a whole token as a real; undefined when it is not one. Same rules as parseRealAt. */
export function parseRealText(text: string): number | undefined {
  if (REAL_TEXT.test(text)) return Number(text.replace(/[dD]/, 'e'));
  const m = NONFINITE_TEXT.exec(text);
  if (m) return m[2].toLowerCase() === 'nan' ? NaN : m[1] === '-' ? -Infinity : Infinity;
  return undefined;
}

function tokenEnd(buf: Uint8Array, p: number): number {
  while (p < buf.length && buf[p] > 32) p++;
  return p;
}

function latin1(buf: Uint8Array, start: number, end: number): string {
  let s = '';
  for (let i = start; i < end; i++) s += String.fromCharCode(buf[i]);
  return s;
}

function slowReal(buf: Uint8Array, start: number, p: number): number {
  const end = tokenEnd(buf, p);
  cursor.end = end;
  const v = parseRealText(latin1(buf, start, end));
  if (v === undefined) {
    cursor.ok = false;
    return NaN;
  }
  cursor.ok = true;
  return v;
}

/**
 * Parse an integer token ([+-] digits) starting at buf[p]; cursor.ok is false when the token is not an
 * integer or its magnitude exceeds 2^53 - 1 (it might not be held exactly).
 */
export function parseIntAt(buf: Uint8Array, p: number): number {
  let c = buf[p];
  let neg = false;
  if (c === 45) {
    neg = true;
    c = buf[++p];
  } else if (c === 43) {
    c = buf[++p];
  }
  let v = 0;
  let nd = 0;
  let digits = 0;
  while (c >= 48 && c <= 57) {
    if (nd > 0 || c !== 48) {
      if (nd < 17) v = v * 10 + (c - 48);
      nd++;
    }
    digits++;
    c = buf[++p];
  }
  if (digits === 0 || c > 32 || v > Number.MAX_SAFE_INTEGER) {
    cursor.end = tokenEnd(buf, p);
    cursor.ok = false;
    return NaN;
  }
  cursor.end = p;
  cursor.ok = true;
  return neg ? -v : v;
}

/** Text of the token starting at p (for error messages and slow paths). */
export function tokenText(buf: Uint8Array, p: number): string {
  return latin1(buf, p, tokenEnd(buf, p));
}
