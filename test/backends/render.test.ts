import { spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, readFileSync, readdirSync, writeFileSync } from 'node:fs';
import { hostname } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { readExitRecordSync } from '../../src/backends/exit-record.js';
import { renderScript, RenderError } from '../../src/backends/render.js';
import { shellQuote } from '../../src/backends/shell.js';
import { writeTaskFilesSync } from '../../src/backends/task-files.js';
import { clearTemplateCache, loadTemplates, TemplateError } from '../../src/backends/templates.js';
import type { TaskSpec } from '../../src/backends/backend.js';
import { HOSTILE } from './corpus.js';
import { alive, makeTask, runScript, removeTempDirs, tempDir, waitFor } from './helpers.js';

afterAll(removeTempDirs);

function write(task: TaskSpec, header: string[] = []): string {
  const script = renderScript(task, header);
  writeTaskFilesSync(task.dir, script, { task: task.id });
  return script;
}

/** `bash -n`: parse without running (GNU Bash Reference Manual, 4.3.1 The Set Builtin, -n). */
function bashSyntaxOk(path: string): { ok: boolean; stderr: string } {
  const r = spawnSync('bash', ['-n', path], { encoding: 'utf8' });
  return { ok: r.status === 0, stderr: r.stderr };
}

/** Parse `env -0` output (GNU coreutils): NAME=VALUE records separated by NUL. */
function parseEnv0(buf: string): Map<string, string> {
  const m = new Map<string, string>();
  for (const rec of buf.split('\0').slice(0, -1)) {
    const i = rec.indexOf('=');
    m.set(rec.slice(0, i), rec.slice(i + 1));
  }
  return m;
}

describe('renderScript: injection corpus', () => {
  it('renders scripts bash -n accepts and that hand every value to the command intact', async () => {
    const root = tempDir();
    // A task directory whose name holds quotes, spaces, $( ), backticks, a newline and non-ASCII.
    const nasty = join(root, `dir with 'single' "double" $(touch PWNED) \`touch PWNED2\` ;&& \\ ü\nline`);
    const env: Record<string, string> = {};
    HOSTILE.forEach((v, i) => (env[`RATCHET_IN_V${i}`] = v));
    env.RATCHET_CAMPAIGN_DIR = root;
    const cmdLiteral = HOSTILE.join('|');
    // The command: dump the environment it sees (coreutils env -0), its working directory, and one
    // literal that itself contains every hostile value (quoted inside the user's own command).
    const command = `env -0 > env.bin; printf '%s' "$PWD" > pwd.txt; printf '%s' ${shellQuote(cmdLiteral)} > literal.txt`;
    const task = makeTask(root, 'x', {
      id: `r0/label/it's $(x) \`y\`\nz`,
      name: `it's $(x) \`y\`\nz`,
      dir: nasty,
      env,
      command,
      setup: ['export FROM_SETUP="set up ok"'],
    });
    const script = write(task);
    expect(bashSyntaxOk(join(nasty, 'run.sh'))).toEqual({ ok: true, stderr: '' });
    expect(script.startsWith('#!')).toBe(true);

    const r = await runScript(nasty);
    expect(r.code).toBe(0);
    expect(readFileSync(join(nasty, 'stderr.log'), 'utf8')).toBe('');
    const seen = parseEnv0(readFileSync(join(nasty, 'env.bin'), 'utf8'));
    HOSTILE.forEach((v, i) => expect(seen.get(`RATCHET_IN_V${i}`)).toBe(v));
    expect(seen.get('RATCHET_TASK')).toBe(task.id);
    expect(seen.get('RATCHET_TASK_DIR')).toBe(nasty);
    expect(seen.get('RATCHET_TASK_JSON')).toBe(join(nasty, 'task.json'));
    expect(seen.get('RATCHET_ROUND')).toBe('0');
    expect(seen.get('RATCHET_STAGE')).toBe('label');
    expect(seen.get('RATCHET_CPUS')).toBe('1');
    expect(seen.get('RATCHET_CAMPAIGN_DIR')).toBe(root);
    expect(seen.get('FROM_SETUP')).toBe('set up ok');
    expect(readFileSync(join(nasty, 'pwd.txt'), 'utf8')).toBe(nasty);
    expect(readFileSync(join(nasty, 'literal.txt'), 'utf8')).toBe(cmdLiteral);
    // Nothing was evaluated: no PWNED files anywhere.
    expect(readdirSync(root)).toEqual([nasty.slice(root.length + 1)]);
    expect(readdirSync(nasty).filter((f) => f.startsWith('PWNED'))).toEqual([]);
    expect(readExitRecordSync(nasty)?.exit_code).toBe(0);
  });

  it('passes the command to bash -c as data: a command with a syntax error fails inside the task, not in the script', async () => {
    const root = tempDir();
    const task = makeTask(root, '0001', { command: 'echo "unterminated \'; exit 0' });
    write(task);
    expect(bashSyntaxOk(join(task.dir, 'run.sh')).ok).toBe(true);
    const r = await runScript(task.dir);
    // bash exits 2 on a syntax error (GNU Bash Reference Manual, 3.7.5 Exit Status: 2 for incorrect usage/syntax).
    expect(r.code).toBe(2);
    expect(readExitRecordSync(task.dir)?.exit_code).toBe(2);
    expect(readFileSync(join(task.dir, 'stderr.log'), 'utf8')).toMatch(/unexpected EOF/);
  });

  it('passes a command starting with a dash as a command, not as an option to bash', async () => {
    const root = tempDir();
    const task = makeTask(root, '0002', { command: '-x' });
    write(task);
    await runScript(task.dir);
    expect(readExitRecordSync(task.dir)?.exit_code).toBe(127);
    expect(readFileSync(join(task.dir, 'stderr.log'), 'utf8')).toMatch(/-x: command not found/);
  });
});

describe('renderScript: the exit record', () => {
  it('records success with ISO times and the host, and sends output to the logs', async () => {
    const root = tempDir();
    const task = makeTask(root, '0000', { command: 'echo out; echo err >&2' });
    write(task);
    const r = await runScript(task.dir);
    expect(r.code).toBe(0);
    const rec = readExitRecordSync(task.dir)!;
    expect(rec.exit_code).toBe(0);
    // ISO 8601 UTC (ISO 8601-1:2019 extended format), seconds resolution.
    expect(rec.start).toMatch(/^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ$/);
    expect(rec.end).toMatch(/^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ$/);
    expect(Date.parse(rec.end)).toBeGreaterThanOrEqual(Date.parse(rec.start));
    expect(rec.host).toBe(hostname().replace(/[^A-Za-z0-9._-]/g, '_'));
    expect(readFileSync(join(task.dir, 'stdout.log'), 'utf8')).toBe('out\n');
    expect(readFileSync(join(task.dir, 'stderr.log'), 'utf8')).toBe('err\n');
    expect(readdirSync(task.dir).filter((f) => f.startsWith('.'))).toEqual([]); // no temporary file left
  });

  it('records a failing command (exit 3)', async () => {
    const root = tempDir();
    const task = makeTask(root, '0000', { command: 'echo bad >&2; exit 3' });
    write(task);
    expect((await runScript(task.dir)).code).toBe(3);
    expect(readExitRecordSync(task.dir)?.exit_code).toBe(3);
  });

  it('records a missing command as 127', async () => {
    const root = tempDir();
    const task = makeTask(root, '0000', { command: 'no-such-program-ratchet --flag' });
    write(task);
    expect((await runScript(task.dir)).code).toBe(127);
    expect(readExitRecordSync(task.dir)?.exit_code).toBe(127);
    expect(readFileSync(join(task.dir, 'stderr.log'), 'utf8')).toMatch(/no-such-program-ratchet: command not found/);
  });

  // 128 + signal number is the shell's status for a command killed by a signal (GNU Bash Reference
  // Manual, 3.7.5 Exit Status); SIGHUP=1, SIGINT=2, SIGTERM=15 on Linux (signal(7)).
  for (const [signal, code] of [['SIGTERM', 143], ['SIGINT', 130], ['SIGHUP', 129]] as const) {
    it(`records ${code} when the script gets ${signal}, and stops the command`, async () => {
      const root = tempDir();
      const task = makeTask(root, '0000', { command: 'echo $$ > cmd.pid; exec sleep 30' });
      write(task);
      let scriptPid = 0;
      const ended = runScript(task.dir, (pid) => (scriptPid = pid));
      await waitFor(() => existsSync(join(task.dir, 'cmd.pid')) && readFileSync(join(task.dir, 'cmd.pid'), 'utf8').endsWith('\n'), 'the command to start');
      const cmdPid = Number(readFileSync(join(task.dir, 'cmd.pid'), 'utf8'));
      process.kill(scriptPid, signal);
      const r = await ended;
      expect(r.code).toBe(code);
      expect(readExitRecordSync(task.dir)?.exit_code).toBe(code);
      expect(alive(cmdPid)).toBe(false);
    });
  }

  it('records the code of a failing set-up line and does not run the command', async () => {
    const root = tempDir();
    const task = makeTask(root, '0000', { setup: ['export A=1', 'sh -c "exit 5"', 'touch after-setup'], command: 'touch ran' });
    write(task);
    expect((await runScript(task.dir)).code).toBe(5);
    expect(readExitRecordSync(task.dir)?.exit_code).toBe(5);
    expect(existsSync(join(task.dir, 'after-setup'))).toBe(false);
    expect(existsSync(join(task.dir, 'ran'))).toBe(false);
  });

  it('lets set-up lines use unset variables and cd elsewhere; the command still runs in the task dir', async () => {
    const root = tempDir();
    const task = makeTask(root, '0000', { setup: ['echo "${NOT_SET_ANYWHERE_XYZ}" >/dev/null', 'cd /'], command: 'pwd > where.txt' });
    write(task);
    expect((await runScript(task.dir)).code).toBe(0);
    expect(readFileSync(join(task.dir, 'where.txt'), 'utf8')).toBe(`${task.dir}\n`);
  });

  it('never runs a task that already has an exit record, and leaves the record alone', async () => {
    const root = tempDir();
    const task = makeTask(root, '0000', { command: 'touch ran' });
    write(task);
    const record = '{"exit_code":0,"start":"2024-01-01T00:00:00Z","end":"2024-01-01T00:00:01Z","host":"h"}\n';
    writeFileSync(join(task.dir, 'exit.json'), record);
    expect((await runScript(task.dir)).code).toBe(0);
    expect(existsSync(join(task.dir, 'ran'))).toBe(false);
    expect(readFileSync(join(task.dir, 'exit.json'), 'utf8')).toBe(record);
  });
});

describe('renderScript: errors', () => {
  const root = tempDir();
  const base = makeTask(root, '0000');
  it('names the task and field for bad values', () => {
    expect(() => renderScript({ ...base, dir: 'relative/dir' }, [])).toThrow(/task r0\/label\/0000: dir: expected an absolute path/);
    expect(() => renderScript({ ...base, command: '  ' }, [])).toThrow(/command: expected a command line/);
    expect(() => renderScript({ ...base, env: { 'BAD-NAME': 'x' } }, [])).toThrow(/env.BAD-NAME: expected a variable name/);
    expect(() => renderScript({ ...base, env: { A: 'x\0y' } }, [])).toThrow(RenderError);
    expect(() => renderScript({ ...base, setup: ['a\0b'] }, [])).toThrow(/setup\[0\]/);
  });
  it('refuses directives without a {{directives}} placeholder, and multi-line directives', () => {
    expect(() => renderScript(base, ['#SBATCH --time=1'])).toThrow(/no \{\{directives\}\} placeholder/);
    const dir = tempDir();
    writeFileSync(join(dir, 'fake.sh'), '#!/bin/bash -l\n{{directives}}\n');
    const t = loadTemplates('fake', dir);
    expect(() => renderScript(base, ['#X a\n#X b'], t)).toThrow(/a directive must be one line/);
    const s = renderScript(base, ['#X --name={{job_name}}', '#X --cpus=1'], t);
    expect(s.startsWith('#!/bin/bash -l\n#X --name={{job_name}}\n#X --cpus=1\n# ratchet task')).toBe(true);
  });
});

describe('templates', () => {
  it('uses a campaign folder override file by file, falling back to the built-in ones', async () => {
    clearTemplateCache();
    const dir = tempDir();
    writeFileSync(join(dir, 'local.sh'), '#!/bin/bash\n# site header for {{job_name}}\n');
    const t = loadTemplates('local', dir);
    expect(t.header.file).toBe(join(dir, 'local.sh'));
    expect(t.body.file).toMatch(/templates\/common\.sh$/);
    const root = tempDir();
    const task = makeTask(root, '0000', { command: 'echo hi' });
    const script = renderScript(task, [], t);
    expect(script.startsWith('#!/bin/bash\n# site header for test-r0-label-0000\n')).toBe(true);
    writeTaskFilesSync(task.dir, script, {});
    expect((await runScript(task.dir)).code).toBe(0);
    expect(readFileSync(join(task.dir, 'stdout.log'), 'utf8')).toBe('hi\n');
  });

  it('reports unknown and malformed placeholders with file and line', () => {
    const dir = tempDir();
    mkdirSync(join(dir, 'a'));
    writeFileSync(join(dir, 'a', 'common.sh'), 'set -u\n\necho {{task_dri}}\n{{command}}{{task_dir}}\n');
    expect(() => loadTemplates('local', join(dir, 'a'))).toThrow(TemplateError);
    expect(() => loadTemplates('local', join(dir, 'a'))).toThrow(`${join(dir, 'a', 'common.sh')}:3: unknown placeholder {{task_dri}}`);
    mkdirSync(join(dir, 'b'));
    writeFileSync(join(dir, 'b', 'common.sh'), '# x\n{{ task_dir }}\n');
    expect(() => loadTemplates('local', join(dir, 'b'))).toThrow(`${join(dir, 'b', 'common.sh')}:2: malformed placeholder`);
    mkdirSync(join(dir, 'c'));
    writeFileSync(join(dir, 'c', 'common.sh'), 'echo {{task_dir}}\n');
    expect(() => loadTemplates('local', join(dir, 'c'))).toThrow(/must use \{\{command\}\}/);
    mkdirSync(join(dir, 'd'));
    writeFileSync(join(dir, 'd', 'local.sh'), '# no shebang\n');
    expect(() => loadTemplates('local', join(dir, 'd'))).toThrow(/local.sh:1: a header template must start with a #! line/);
    expect(() => loadTemplates('local', join(dir, 'missing'))).toThrow(/does not exist or is not a folder/);
    expect(() => loadTemplates('no-such-backend')).toThrow(/no template no-such-backend.sh/);
  });

  it('the built-in scripts pass bash -n for every hostile value as task id, dir, env and command', () => {
    const root = tempDir();
    const path = join(root, 'run.sh');
    for (const v of HOSTILE) {
      const task: TaskSpec = { ...makeTask(root, 'y'), id: v || 'empty', name: v, dir: join(root, v.replace(/\//g, '_') || 'e'), env: { V: v }, command: `: ${v}` };
      writeFileSync(path, renderScript(task, []));
      const r = bashSyntaxOk(path);
      expect(r, `value ${JSON.stringify(v)}`).toEqual({ ok: true, stderr: '' });
    }
    // Cross-check with a second reader: the script text has exactly one line per template line plus
    // one per export and set-up line (no value spilled onto its own line).
    const t = makeTask(root, 'z', { env: { A: 'a\nb\nc' } });
    const lines = renderScript(t, []).split('\n').length;
    const plain = renderScript({ ...t, env: { A: 'abc' } }, []).split('\n').length;
    expect(lines).toBe(plain);
  });
});
