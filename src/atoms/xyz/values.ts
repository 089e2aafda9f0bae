/**
 * Typing of comment-line values, following the extended XYZ specification's order
 * (libAtoms/extxyz README, "Order for identifying primitive data types"): integer, then real,
 * then logical, then string. Non-finite reals (nan, inf, infinity, any case) are read as reals too,
 * as Python-based writers print them that way.
 */
import { parseRealText } from './numbers.js';

const INT_TEXT = /^[+-]?(?:0|[1-9][0-9]*)$/;
const FLOAT_TEXT = /^[+-]?(?:(?:0|[1-9][0-9]*)\.[0-9]*|\.[0-9]+|(?:0|[1-9][0-9]*))(?:[dDeE][+-]?[0-9]+)?$/;
const NONFINITE_TEXT = /^[+-]?(?:nan|inf|infinity)$/i;
const TRUE_TEXT = new Set(['T', 'true', 'True', 'TRUE']);
const FALSE_TEXT = new Set(['F', 'false', 'False', 'FALSE']);

export type Primitive = 'int' | 'real' | 'bool' | 'string';

/**
 * The primitive type of one bare token. Integers beyond 2^53 are read as the nearest double (which is
 * what the shortest round-trip text of such a double looks like, e.g. 1e20 prints as 100000000000000000000).
 */
export function primitiveOf(text: string): Primitive {
  if (INT_TEXT.test(text)) return 'int';
  if (FLOAT_TEXT.test(text) || NONFINITE_TEXT.test(text)) return 'real';
  if (TRUE_TEXT.has(text) || FALSE_TEXT.has(text)) return 'bool';
  return 'string';
}

export function numberOf(text: string): number {
  return parseRealText(text) as number;
}

export function boolOf(text: string): boolean {
  return TRUE_TEXT.has(text);
}

/** Typed scalar of a bare token. */
export function scalarOf(text: string): number | boolean | string {
  const t = primitiveOf(text);
  if (t === 'int' || t === 'real') return numberOf(text);
  if (t === 'bool') return boolOf(text);
  return text;
}

/**
 * The common type of a list of bare tokens: int and real mix to real; anything else mixed is string.
 */
export function commonType(tokens: string[]): Primitive {
  let numeric = true;
  let bool = true;
  for (const t of tokens) {
    const p = primitiveOf(t);
    if (p !== 'int' && p !== 'real') numeric = false;
    if (p !== 'bool') bool = false;
    if (!numeric && !bool) return 'string';
  }
  return numeric ? 'real' : bool ? 'bool' : 'string';
}
