/**
 * One frame from its bytes: the comment line (key=value pairs) and the atom lines.
 */
import type { Frame, Pbc } from '../frame.js';
import { XyzError, type Where } from './errors.js';
import { parseAtoms } from './atoms.js';
import { parseComment } from './comment.js';
import { PLAIN_LAYOUT, parseProperties } from './properties.js';
import type { FrameSpan } from './scanner.js';
import { MAX_Z, SYMBOLS } from '../elements.js';

/**
 * Parse the frame `span` of `buf`. `wanted`: names of the per-atom columns to keep besides species and
 * pos (null = all). `lastLineOpen`: offset of the file's last line when it had no newline, else -1.
 * `positions` false: pos is checked like a skipped column but not parsed, and frame.positions is empty.
 */
export function parseFrame(buf: Buffer, span: FrameSpan, file: string, wanted: Set<string> | null, lastLineOpen = -1, positions = true): Frame {
  const where: Where = { file, line: span.line, frame: span.index };
  let commentEnd = span.commentEnd;
  if (commentEnd > span.commentStart && buf[commentEnd - 1] === 13) commentEnd--;
  const text = buf.toString('utf8', span.commentStart, commentEnd);
  const comment = parseComment(text, where);
  const layout = comment.properties !== null ? parseProperties(comment.properties, file, span.line + 1) : PLAIN_LAYOUT;
  const block = parseAtoms(buf, span.atomsStart, span.natoms, layout, wanted, where, lastLineOpen, positions, span.end);
  let species = block.species;
  if (layout.species < 0 && block.z !== null) {
    species = new Array(span.natoms);
    for (let a = 0; a < span.natoms; a++) {
      const z = block.z[a];
      if (!(z >= 1 && z <= MAX_Z)) {
        throw new XyzError(file, span.line + 2 + a, `atom ${a} of frame ${span.index}, column ${layout.props[layout.z].first + 1} (Z): expected an atomic number from 1 to ${MAX_Z}, found ${z}`);
      }
      species[a] = SYMBOLS[z - 1];
    }
  }
  const pbc: Pbc = comment.pbc ?? (comment.lattice !== null ? [true, true, true] : [false, false, false]);
  return { species, positions: block.positions, cell: comment.lattice, pbc, arrays: block.arrays, info: comment.info };
}
