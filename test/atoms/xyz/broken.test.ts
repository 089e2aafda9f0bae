/**
 * A corpus of broken files (test/atoms/xyz/broken/), each with the exact error expected: the file, the
 * 1-based line, what was expected and what was found. Frames before the bad one are still delivered.
 */
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { gzipSync } from 'node:zlib';
import { describe, expect, it } from 'vitest';
import { XyzError } from '../../../src/atoms/xyz/errors.js';
import { readFrames } from '../../../src/atoms/xyz/reader.js';
import { put, tempDir } from './helpers.js';

const BROKEN = fileURLToPath(new URL('./broken/', import.meta.url));

/** [file, message without the directory]. */
const EXPECTED: [string, string][] = [
  ['atomic-number-zero.xyz', "atomic-number-zero.xyz:7: atom 1 of frame 1, column 4 (Z): expected an atomic number from 1 to 118, found 0"],
  ['bad-integer.xyz', "bad-integer.xyz:3: atom 0 of frame 0, column 5 (tag): expected an integer, found \"1.5\""],
  ['bad-logical.xyz', "bad-logical.xyz:3: atom 0 of frame 0, column 5 (fixed): expected a logical (T, F, True, False, true, false), found \"yes\""],
  ['bad-real-hex.xyz', "bad-real-hex.xyz:3: atom 0 of frame 0, column 4 (pos, component 3 of 3): expected a real number, found \"0x10\""],
  ['bad-real-third-frame.xyz', "bad-real-third-frame.xyz:9: atom 0 of frame 2, column 4 (pos, component 3 of 3): expected a real number, found \"nan0\""],
  ['bad-real.xyz', "bad-real.xyz:4: atom 1 of frame 0, column 3 (pos, component 2 of 3): expected a real number, found \"1.2.3\""],
  ['blank-line-between-frames.xyz', "blank-line-between-frames.xyz:4: expected the atom count of frame 1, found a blank line (blank lines are allowed only at the end of the file)"],
  ['duplicate-key.xyz', "duplicate-key.xyz:2: comment line, column 41: key 'energy' appears more than once"],
  ['key-without-value.xyz', "key-without-value.xyz:2: comment line, column 32: key 'energy' is followed by '=' but no value"],
  ['lattice-not-numbers.xyz', "lattice-not-numbers.xyz:2: Lattice: expected 9 numbers (ax ay az bx by bz cx cy cz), found \"a b c d e f g h i\""],
  ['lattice-six-numbers.xyz', "lattice-six-numbers.xyz:2: Lattice: expected 9 numbers (ax ay az bx by bz cx cy cz), found 6 numbers \"1 0 0 0 1 0\""],
  ['natoms-negative.xyz', "natoms-negative.xyz:1: expected the atom count of frame 0 (a non-negative integer alone on its line), found \"-3\""],
  ['natoms-not-integer.xyz', "natoms-not-integer.xyz:1: expected the atom count of frame 0 (a non-negative integer alone on its line), found \"abc\""],
  ['natoms-second-frame.xyz', "natoms-second-frame.xyz:4: expected the atom count of frame 1 (a non-negative integer alone on its line), found \"1.5\""],
  ['natoms-with-text.xyz', "natoms-with-text.xyz:1: expected the atom count of frame 0 (a non-negative integer alone on its line), found \"1 atom\""],
  ['pbc-two-values.xyz', "pbc-two-values.xyz:2: pbc: expected 3 logicals like \"T T F\", found 2 values \"T T\""],
  ['properties-bad-count.xyz', "properties-bad-count.xyz:2: Properties: column 'pos' has count \"0\", expected a positive integer"],
  ['properties-bad-type.xyz', "properties-bad-type.xyz:2: Properties: column 'pos' has type \"X\", expected one of S, R, I, L"],
  ['properties-duplicate.xyz', "properties-duplicate.xyz:2: Properties: column 'q' appears more than once"],
  ['properties-missing-field.xyz', "properties-missing-field.xyz:2: Properties: expected name:type:count triplets (type S, R, I or L; count a positive integer), found 5 fields in \"species:S:1:pos:R\""],
  ['properties-no-pos.xyz', "properties-no-pos.xyz:2: Properties: no pos:R:3 column (positions are required), found \"species:S:1\""],
  ['properties-no-species.xyz', "properties-no-species.xyz:2: Properties: no species:S:1 column and no Z:I:1 column to take the elements from, found \"pos:R:3:q:R:1\""],
  ['properties-pos-width.xyz', "properties-pos-width.xyz:2: Properties: expected pos:R:3 (positions), found pos:R:2"],
  ['too-few-columns.xyz', "too-few-columns.xyz:4: atom 1 of frame 0: expected 4 columns (Properties=species:S:1:pos:R:3), found 3"],
  ['too-many-columns.xyz', "too-many-columns.xyz:3: atom 0 of frame 0: expected 4 columns (Properties=species:S:1:pos:R:3), found 5"],
  ['truncated-after-count.xyz', "truncated-after-count.xyz:5: file ends after the atom count line of frame 1 (starting at line 4): expected a comment line and 3 atom lines"],
  ['truncated-cut-line.xyz', "truncated-cut-line.xyz:8: file ends after 2 of 3 atom lines of frame 1 (starting at line 4); the last line has no line end, it may be cut short"],
  ['truncated-inside-last-line.xyz', "truncated-inside-last-line.xyz:4: atom 1 of frame 0: expected 4 columns (Properties=species:S:1:pos:R:3), found 3 (the file ends inside this line)"],
  ['truncated-last-frame.xyz', "truncated-last-frame.xyz:8: file ends after 2 of 3 atom lines of frame 1 (starting at line 4)"],
  ['unterminated-bracket.xyz', "unterminated-bracket.xyz:2: unterminated [ in the comment line: the one at column 34 (value of 'a') has no closing ]"],
  ['unterminated-quote.xyz', "unterminated-quote.xyz:2: unterminated quote in the comment line: the \" at column 9 (value of 'Lattice') has no closing \""],
  ['value-without-key.xyz', "value-without-key.xyz:2: comment line, column 32: expected a key before '=', found '='"],
];

async function firstError(path: string): Promise<{ error: XyzError; frames: number }> {
  let frames = 0;
  try {
    for await (const _ of readFrames(path)) frames++;
  } catch (err) {
    if (err instanceof XyzError) return { error: err, frames };
    throw err;
  }
  throw new Error(`${path}: no error`);
}

describe('broken files', () => {
  it('every file of the corpus has an expected message and vice versa', () => {
    expect(readdirSync(BROKEN).filter((f) => f.endsWith('.xyz')).sort()).toEqual(EXPECTED.map(([f]) => f).sort());
  });

  for (const [file, message] of EXPECTED) {
    it(file, async () => {
      const path = join(BROKEN, file);
      const { error } = await firstError(path);
      expect(error.message).toBe(`${BROKEN}${message}`);
      expect(error.file).toBe(path);
      expect(error.line).toBe(Number(/^[^:]+:(\d+):/.exec(message)![1]));
      expect(`${error.file}:${error.line}: ${error.detail}`).toBe(error.message);
    });
  }

  it('delivers the good frames before the bad one', async () => {
    expect((await firstError(join(BROKEN, 'bad-real-third-frame.xyz'))).frames).toBe(2);
    expect((await firstError(join(BROKEN, 'truncated-last-frame.xyz'))).frames).toBe(1);
  });

  const dir = tempDir();

  it('reports the same errors inside gzip-compressed files, with the same line numbers', async () => {
    for (const file of ['truncated-last-frame.xyz', 'bad-real.xyz', 'unterminated-quote.xyz']) {
      const gz = put(dir, `${file}.gz`, gzipSync(readFileSync(join(BROKEN, file))));
      const plain = (await firstError(join(BROKEN, file))).error;
      const inGz = (await firstError(gz)).error;
      expect(inGz.line).toBe(plain.line);
      expect(inGz.detail).toBe(plain.detail);
    }
  });

  it('reports a gzip file that is cut short', async () => {
    const lines = ['3', 'Properties=species:S:1:pos:R:3'];
    for (let k = 0; k < 3; k++) lines.push(`H ${k} 0 0`);
    const text = Array.from({ length: 2000 }, () => lines.join('\n')).join('\n') + '\n';
    const gz = gzipSync(Buffer.from(text));
    const path = put(dir, 'cut.xyz.gz', gz.subarray(0, Math.floor(gz.length / 2)));
    const { error } = await firstError(path);
    expect(error.detail).toMatch(/^gzip data could not be inflated \(unexpected end of file/);
    expect(error.file).toBe(path);
    expect(error.line).toBeGreaterThan(1);
  });

  it('names a missing file', async () => {
    await expect(firstError(join(dir, 'nope.xyz'))).rejects.toThrow(/ENOENT.*nope\.xyz/);
  });
});
