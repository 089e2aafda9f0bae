/** Per-frame jobs for the reader benchmark: they only touch the parsed data, so the time measured is the reader's. */
export function touch(frame, index) {
  let s = 0;
  for (const col of frame.arrays.values()) s += col.values[0];
  return [index, frame.species.length, frame.positions[0] + s];
}

/** touch without the frame index (for mapFrames' range-split mode, usesIndex: false). */
export function touchNoIndex(frame) {
  let s = 0;
  for (const col of frame.arrays.values()) s += col.values[0];
  return [frame.species.length, (frame.positions.length ? frame.positions[0] : 0) + s];
}
