/**
 * Plain-text tables for terminal output: columns padded to their widest cell, numbers right-aligned.
 */

export type Align = 'left' | 'right';

export interface TableOptions {
  /** Per column; default: right for cells that all look like numbers, left otherwise. */
  align?: Align[];
  /** Put before every line (e.g. two spaces). */
  indent?: string;
  /** Between columns (default two spaces). */
  gap?: string;
}

const NUMERIC = /^[-+]?(\d+(\.\d*)?|\.\d+)(e[-+]?\d+)?%?$|^-$|^n\/a$/i;

/** Render rows (the first may be a header) as aligned lines, each ending in a newline. */
export function renderTable(rows: string[][], options: TableOptions = {}): string {
  if (rows.length === 0) return '';
  const ncol = Math.max(...rows.map((r) => r.length));
  const width = Array.from({ length: ncol }, (_, c) => Math.max(...rows.map((r) => [...(r[c] ?? '')].length)));
  const align =
    options.align ??
    Array.from({ length: ncol }, (_, c): Align => (rows.slice(1).length > 0 && rows.slice(1).every((r) => NUMERIC.test(r[c] ?? '')) ? 'right' : 'left'));
  const gap = options.gap ?? '  ';
  const indent = options.indent ?? '';
  return rows
    .map((r) => {
      const cells = Array.from({ length: ncol }, (_, c) => {
        const cell = r[c] ?? '';
        const pad = ' '.repeat(width[c] - [...cell].length);
        return align[c] === 'right' ? pad + cell : cell + pad;
      });
      return (indent + cells.join(gap)).trimEnd() + '\n';
    })
    .join('');
}

/** Two-column "label  value" lines, labels left-aligned. */
export function renderPairs(pairs: [string, string][], indent = '  '): string {
  return renderTable(pairs.map(([k, v]) => [k, v]), { align: ['left', 'left'], indent });
}
