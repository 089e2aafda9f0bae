import { describe, expect, it } from 'vitest';
import { Output, colorWanted } from '../../src/engine/output.js';

function capture(tty: boolean, env: NodeJS.ProcessEnv = {}) {
  const chunks: string[] = [];
  const stream = { write: (s: string) => chunks.push(s), isTTY: tty, columns: 80 };
  return { out: new Output(stream, { color: colorWanted(stream, env) }), text: () => chunks.join('') };
}

describe('what run and status print', () => {
  it('colours verdicts on a terminal, never with NO_COLOR or off a terminal', () => {
    expect(capture(true).out.word('fail')).toBe('\x1b[31mfail\x1b[0m');
    // https://no-color.org: any non-empty NO_COLOR value turns colour off.
    expect(capture(true, { NO_COLOR: '1' }).out.word('fail')).toBe('fail');
    expect(capture(true, { NO_COLOR: '' }).out.word('pass')).toBe('\x1b[32mpass\x1b[0m');
    expect(capture(false).out.word('fail')).toBe('fail');
  });

  it('draws one bar in place on a terminal', () => {
    const c = capture(true);
    c.out.progress('r0/label', 0, 4, '2 running', true);
    c.out.progress('r0/label', 4, 4, '0 running', true);
    c.out.line('r0/label pass');
    const t = c.text();
    expect(t).toContain('\r\x1b[2Kr0/label [------------------------] 0/4 2 running');
    expect(t).toContain('\r\x1b[2Kr0/label [########################] 4/4 0 running');
    expect(t.endsWith('\r\x1b[2Kr0/label pass\n')).toBe(true);
  });

  it('prints plain progress lines, a tenth at a time, off a terminal', () => {
    const c = capture(false);
    for (let done = 0; done <= 100; done++) c.out.progress('r0/label', done, 100, '');
    const lines = c.text().trim().split('\n');
    expect(lines).toHaveLength(10);
    expect(lines[0]).toBe('r0/label 10/100 ended');
    expect(lines.at(-1)).toBe('r0/label 100/100 ended');
    expect(c.text()).not.toContain('\r');
  });
});
