/**
 * What `ratchet run`, `retry` and `status` print: plain lines, a progress bar on a terminal (redrawn
 * in place, at most ten times a second), plain progress lines when the output is not a terminal, and
 * colour only on a terminal and never when NO_COLOR is set (https://no-color.org: any non-empty value).
 */

export interface OutStream {
  write(s: string): unknown;
  isTTY?: boolean;
  columns?: number;
}

export function colorWanted(stream: OutStream, env: NodeJS.ProcessEnv = process.env): boolean {
  return stream.isTTY === true && !(env.NO_COLOR !== undefined && env.NO_COLOR !== '') && env.TERM !== 'dumb';
}

const CODES = { red: 31, green: 32, yellow: 33, dim: 2, bold: 1 } as const;
export type Colour = keyof typeof CODES;

export class Output {
  readonly tty: boolean;
  readonly color: boolean;
  private drawn = false;
  private lastDraw = 0;
  private lastPlain = new Map<string, number>();
  /** --quiet: no progress lines or bar (verdicts, notes and the outcome still print). */
  quiet = false;
  /** --verbose: also one line per task event (submitted, started, ended with its exit code and reason). */
  verbose = false;

  constructor(
    readonly stream: OutStream,
    opts: { tty?: boolean; color?: boolean } = {},
  ) {
    this.tty = opts.tty ?? stream.isTTY === true;
    this.color = opts.color ?? colorWanted(stream);
  }

  paint(text: string, colour: Colour): string {
    return this.color ? `\x1b[${CODES[colour]}m${text}\x1b[0m` : text;
  }

  /** A verdict or state word, coloured by meaning. */
  word(w: string): string {
    if (w === 'pass' || w === 'succeeded' || w === 'passed' || w === 'converged') return this.paint(w, 'green');
    if (w === 'warn' || w === 'running' || w === 'exhausted') return this.paint(w, 'yellow');
    if (w === 'fail' || w === 'failed' || w === 'blocked' || w === 'lost' || w === 'walltime' || w === 'out_of_memory') return this.paint(w, 'red');
    return w;
  }

  /** One line (clears a progress bar first). */
  line(text = ''): void {
    this.clear();
    this.stream.write(`${text}\n`);
  }

  private clear(): void {
    if (this.drawn) {
      this.stream.write('\r\x1b[2K');
      this.drawn = false;
    }
  }

  /**
   * Progress of a stage's tasks. On a terminal: one bar redrawn in place. Otherwise: a plain line each
   * time another tenth of the tasks has ended (and at the end), so logs stay short.
   */
  progress(label: string, done: number, total: number, detail: string, force = false): void {
    if (this.quiet) return;
    if (this.tty) {
      const now = Date.now();
      if (!force && now - this.lastDraw < 100 && done < total) return;
      this.lastDraw = now;
      const width = 24;
      const filled = total === 0 ? width : Math.round((done / total) * width);
      const bar = '#'.repeat(filled) + '-'.repeat(width - filled);
      const text = `${label} [${bar}] ${done}/${total}${detail ? ` ${detail}` : ''}`;
      const cols = this.stream.columns ?? 100;
      this.stream.write(`\r\x1b[2K${text.length > cols - 1 ? text.slice(0, cols - 1) : text}`);
      this.drawn = true;
      return;
    }
    const step = total === 0 ? 1 : Math.floor((done * 10) / total);
    const key = label;
    const prev = this.lastPlain.get(key);
    if (prev === undefined || step > prev || (done === total && prev < 10)) {
      this.lastPlain.set(key, done === total ? 10 : step);
      if (done > 0 || total === 0) this.stream.write(`${label} ${done}/${total} ended${detail ? `, ${detail}` : ''}\n`);
    }
  }

  /** A line shown only with --verbose. */
  detail(text: string): void {
    if (this.verbose) this.line(text);
  }

  /** End the progress display of a label (the next progress of the same label starts afresh). */
  endProgress(label: string): void {
    this.clear();
    this.lastPlain.delete(label);
  }
}

/** An Output that keeps what it prints (tests, and callers that print later). */
export class BufferOutput extends Output {
  readonly chunks: string[];
  constructor(opts: { tty?: boolean; color?: boolean } = {}) {
    const chunks: string[] = [];
    super({ write: (s: string) => chunks.push(s), isTTY: opts.tty ?? false }, { tty: opts.tty ?? false, color: opts.color ?? false });
    this.chunks = chunks;
  }
  get text(): string {
    return this.chunks.join('');
  }
}
