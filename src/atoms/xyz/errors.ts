/**
 * Errors of the extended XYZ reader and writer.
 * A read error names the file and the 1-based line, and says what was expected and what was found.
 */

export class XyzError extends Error {
  override name = 'XyzError';
  /** The file being read (as given by the caller). */
  readonly file: string;
  /** 1-based line number the problem was found on. */
  readonly line: number;
  /** The message without the `file:line: ` prefix. */
  readonly detail: string;

  constructor(file: string, line: number, detail: string) {
    super(`${file}:${line}: ${detail}`);
    this.file = file;
    this.line = line;
    this.detail = detail;
  }
}

/** A frame that cannot be written (bad shapes, values that extended XYZ cannot hold). */
export class XyzWriteError extends Error {
  override name = 'XyzWriteError';
}

/** Where we are while parsing a frame: used to build XyzError messages. */
export interface Where {
  file: string;
  /** 1-based line number of the frame's atom-count line. */
  line: number;
  /** 0-based frame index in the file. */
  frame: number;
}

const MAX_SHOWN = 60;

/** Show a piece of found text in an error message: quoted, control characters escaped, long text shortened. */
export function shown(text: string): string {
  let t = JSON.stringify(text);
  if (t.length > MAX_SHOWN + 2) t = `${t.slice(0, MAX_SHOWN)}…"`;
  return t;
}
