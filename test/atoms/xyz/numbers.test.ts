/**
 * Numbers are parsed exactly as JavaScript's Number() parses the same text (the reference here is V8's
 * own Number(), independent of our byte-level code), on edge cases and on many random strings,
 * both through parseRealAt/parseRealText and through the reader's atom-line path.
 */
import { describe, expect, it } from 'vitest';
import { cursor, parseIntAt, parseRealAt, parseRealText } from '../../../src/atoms/xyz/numbers.js';
import { readAll, put, rng, sameDouble, tempDir } from './helpers.js';

const EDGE = [
  '0', '-0', '+0', '0.0', '-0.0', '-0.000', '0e0', '-0e-400', '1', '-1', '+1', '1.', '.5', '-.5', '+.5', '5.e3',
  '0.1', '0.2', '0.3', '0.30000000000000004', '1.5', '-2.75', '3.14159265358979', '3.141592653589793',
  '9007199254740991', '9007199254740992', '9007199254740993', '9007199254740994', '9007199254740995',
  '18014398509481985', '123456789012345678901234567890', '0.000000000000000000000000000001',
  '1e22', '1e23', '1e-22', '1e-23', '4.35e22', '12345e-22', '123456789012345e22', '1234567890123456e-22',
  '1e-320', '4.9e-324', '5e-324', '2.4703282292062327e-324', '2.4703282292062328e-324', '1e-400',
  '2.2250738585072011e-308', '2.2250738585072014e-308', '2.225073858507201e-308',
  '1.7976931348623157e308', '1.7976931348623158e308', '1.7976931348623159e308', '1e309', '-1e309',
  '8.98846567431158e307', '00012', '-00012.500', '0000000000000000000000001', '1E5', '1e+05', '1E-05', '7e0',
  '1.00000000000000011102230246251565404236316680908203125', '1.000000000000000111022302462515654042363166809082031251',
  '0.1000000000000000055511151231257827021181583404541015625', '12.34567890', '-1234.56789012', '  '.trim() || '0',
  '6.02214076e23', '1.602176634e-19', '8.617333262e-5', '299792458', '1e0', '1.0e+000', '123.456e-7',
];

/** Strings that are not numbers in extended XYZ (Number() accepts some of them: hex, '' and 'Infinity' spellings aside). */
const NOT_NUMBERS = ['.', '-', '+', 'e5', '1e', '1e+', '1e-', '1.2.3', '0x10', '0b1', '1_000', '--1', '+-1', '1e5.5', 'abc', '1,5', 'T', '1..2', '1ee5', 'nan1', 'infinit', '1d', '.e1'];

function randomNumberText(r: () => number): string {
  const digits = (n: number) => Array.from({ length: n }, () => String(Math.floor(r() * 10))).join('');
  const sign = ['', '-', '+'][Math.floor(r() * 3)];
  let intPart = digits(Math.floor(r() * 21));
  const frac = r() < 0.2 ? '' : r() < 0.1 ? '.' : '.' + digits(Math.floor(r() * 21));
  if (intPart === '' && frac.length < 2) intPart = digits(1 + Math.floor(r() * 5));
  const exp = r() < 0.5 ? '' : `${r() < 0.5 ? 'e' : 'E'}${['', '-', '+'][Math.floor(r() * 3)]}${digits(1 + Math.floor(r() * 3))}`;
  return sign + intPart + frac + exp;
}

function randomDoubleText(r: () => number): string {
  const dv = new DataView(new ArrayBuffer(8));
  let x: number;
  do {
    dv.setUint32(0, Math.floor(r() * 2 ** 32));
    dv.setUint32(4, Math.floor(r() * 2 ** 32));
    x = dv.getFloat64(0);
  } while (!Number.isFinite(x));
  const y = (r() - 0.5) * 10 ** Math.floor(r() * 12 - 4);
  switch (Math.floor(r() * 6)) {
    case 0: return String(x);
    case 1: return x.toExponential(Math.floor(r() * 20));
    case 2: return x.toPrecision(1 + Math.floor(r() * 21));
    case 3: return String(y);
    case 4: return y.toFixed(Math.floor(r() * 12));
    default: return y.toExponential(Math.floor(r() * 17));
  }
}

function viaBytes(text: string): { value: number; ok: boolean; end: number } {
  const buf = Buffer.from(`${text} next`);
  const value = parseRealAt(buf, 0);
  return { value, ok: cursor.ok, end: cursor.end };
}

describe('parseRealAt / parseRealText agree with Number()', () => {
  it('on edge cases', () => {
    for (const s of EDGE) {
      const want = Number(s);
      const got = viaBytes(s);
      expect(got.ok, s).toBe(true);
      expect(got.end, s).toBe(s.length);
      expect(sameDouble(got.value, want), `${s}: got ${got.value}, Number gives ${want}`).toBe(true);
      expect(sameDouble(parseRealText(s)!, want), s).toBe(true);
    }
  });

  it('on 30000 random decimal strings and formatted doubles', () => {
    const r = rng(20240601);
    for (let k = 0; k < 30000; k++) {
      const s = k % 2 === 0 ? randomNumberText(r) : randomDoubleText(r);
      const want = Number(s);
      const got = viaBytes(s);
      if (!got.ok || !sameDouble(got.value, want)) expect.fail(`${JSON.stringify(s)}: got ${got.value} (ok ${got.ok}), Number gives ${want}`);
      if (!sameDouble(parseRealText(s)!, want)) expect.fail(`parseRealText(${JSON.stringify(s)}) differs from Number`);
    }
  });

  it('reads a Fortran D exponent as E (Number() itself does not accept D)', () => {
    for (const [s, e] of [['1.0D+00', '1.0e+00'], ['-2.5d-3', '-2.5e-3'], ['6.02214076D23', '6.02214076e23'], ['1d400', '1e400']]) {
      expect(sameDouble(viaBytes(s).value, Number(e)), s).toBe(true);
      expect(sameDouble(parseRealText(s)!, Number(e)), s).toBe(true);
    }
  });

  it('reads nan, inf and infinity in any case, as Python and Fortran print them', () => {
    for (const s of ['nan', 'NaN', 'NAN', '-nan', '+nan']) expect(Number.isNaN(viaBytes(s).value)).toBe(true);
    for (const s of ['inf', 'Inf', 'INF', '+inf', 'infinity', 'Infinity', '+Infinity']) expect(viaBytes(s).value).toBe(Infinity);
    for (const s of ['-inf', '-Infinity', '-INFINITY']) expect(viaBytes(s).value).toBe(-Infinity);
  });

  it('refuses what is not a number', () => {
    for (const s of NOT_NUMBERS) {
      const got = viaBytes(s);
      expect(got.ok, s).toBe(false);
      expect(got.end, s).toBe(s.length);
      expect(parseRealText(s), s).toBeUndefined();
    }
  });

  it('stops at any separator byte (space, tab, CR, LF)', () => {
    for (const sep of [' ', '\t', '\r', '\n']) {
      const buf = Buffer.from(`-12.5e1${sep}x`);
      expect(parseRealAt(buf, 0)).toBe(-125);
      expect(cursor.end).toBe(7);
    }
  });
});

describe('parseIntAt', () => {
  it('parses integers and refuses reals, junk and values beyond 2^53 - 1', () => {
    const ok: [string, number][] = [['0', 0], ['42', 42], ['-7', -7], ['+3', 3], ['007', 7], ['9007199254740991', 2 ** 53 - 1], ['-9007199254740991', -(2 ** 53 - 1)], ['00000000000000000000123', 123]];
    for (const [s, v] of ok) {
      expect(parseIntAt(Buffer.from(`${s} `), 0), s).toBe(v);
      expect(cursor.ok, s).toBe(true);
    }
    for (const s of ['1.0', '1e3', 'x', '-', '9007199254740992', '9007199254740993', '123456789012345678901']) {
      parseIntAt(Buffer.from(`${s} `), 0);
      expect(cursor.ok, s).toBe(false);
    }
  });
});

describe('the reader parses atom-line numbers exactly as Number()', () => {
  const dir = tempDir();
  it('on edge cases and 6000 random strings in the pos and a real column', async () => {
    const r = rng(7);
    const texts = [...EDGE];
    for (let k = 0; k < 6000; k++) texts.push(k % 2 === 0 ? randomNumberText(r) : randomDoubleText(r));
    while (texts.length % 4 !== 0) texts.push('0');
    const n = texts.length / 4;
    const lines = [`${n}`, 'Properties=species:S:1:pos:R:3:q:R:1'];
    for (let a = 0; a < n; a++) lines.push(`H ${texts.slice(4 * a, 4 * a + 4).join('  ')}`);
    const path = put(dir, 'numbers.xyz', lines.join('\n') + '\n');
    const [frame] = await readAll(path);
    const q = frame.arrays.get('q')!.values as Float64Array;
    for (let a = 0; a < n; a++) {
      for (let k = 0; k < 3; k++) {
        const s = texts[4 * a + k];
        if (!sameDouble(frame.positions[3 * a + k], Number(s))) expect.fail(`${s}: read ${frame.positions[3 * a + k]}, Number gives ${Number(s)}`);
      }
      const s = texts[4 * a + 3];
      if (!sameDouble(q[a], Number(s))) expect.fail(`${s}: read ${q[a]}, Number gives ${Number(s)}`);
    }
  });
});

describe('countTokens (word-at-a-time column counting for skipped columns)', () => {
  it('agrees with a byte-by-byte count on random lines at every alignment', async () => {
    const { countTokens } = await import('../../../src/atoms/xyz/atoms.js');
    const r = rng(17);
    const alphabet = [' ', ' ', ' ', '\t', '\r', 'a', '1', '.', '-', 'é', '\u0000', '~', '!'];
    for (let k = 0; k < 4000; k++) {
      const len = Math.floor(r() * 120);
      const text = Array.from({ length: len }, () => alphabet[Math.floor(r() * alphabet.length)]).join('');
      const bytes = Buffer.from(text, 'utf8');
      const pad = Math.floor(r() * 7);
      const ab = new ArrayBuffer(pad + bytes.length + 8);
      const buf = new Uint8Array(ab, pad, bytes.length + 1);
      buf.set(bytes);
      buf[bytes.length] = 10;
      const shift = (4 - (buf.byteOffset & 3)) & 3;
      const words = buf.length >= shift + 4 ? new Int32Array(ab, buf.byteOffset + shift, (buf.length - shift) >> 2) : null;
      // start anywhere at a separator or token start
      let p = Math.floor(r() * (bytes.length + 1));
      while (p > 0 && p < bytes.length && buf[p - 1] > 32 && buf[p] > 32) p--;
      let want = 0;
      for (let i = p; i < bytes.length; i++) if (buf[i] > 32 && (i === p || buf[i - 1] <= 32)) want++;
      const got = countTokens(buf, words, shift, p, bytes.length);
      if (got !== want) expect.fail(`${JSON.stringify(text)} from ${p} (offset ${pad}): counted ${got}, expected ${want}`);
    }
  });
});
