import { createHash } from 'node:crypto';
import type { Frame } from '../atoms/frame.js';

/**
 * A frame's structural identity: sha256 over species, positions, cell and pbc (the bytes of the
 * float64 values, which the extended XYZ writer round-trips exactly). Labels and info are left out.
 * A labeler may round positions when it writes them back (within the label gate's 1e-4 Å), which
 * changes the digest: the label stage therefore hashes the frame it SENT, never the labeled copy,
 * and writes the sent structure into the data sets, so the digest of a data-set frame is the same.
 */
export function frameDigest(frame: Frame): Buffer {
  const h = createHash('sha256');
  h.update(frame.species.join(' '));
  h.update('\n');
  h.update(Buffer.from(frame.positions.buffer, frame.positions.byteOffset, frame.positions.byteLength));
  if (frame.cell) h.update(Buffer.from(frame.cell.buffer, frame.cell.byteOffset, frame.cell.byteLength));
  h.update(frame.pbc.map((p) => (p ? 'T' : 'F')).join(''));
  return h.digest();
}

/**
 * Whether a frame belongs to the held-out test set. The decision depends only on the frame's content,
 * so a frame that is held out in one round is held out in every round and never leaks into training.
 */
export function isHeldOut(frame: Frame, fraction: number): boolean {
  if (!(fraction >= 0 && fraction < 1)) throw new Error(`holdout fraction must be in [0, 1), got ${fraction}`);
  const u = frameDigest(frame).readUInt32BE(0) / 4294967296;
  return u < fraction;
}
