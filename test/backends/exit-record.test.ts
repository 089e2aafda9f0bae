import { existsSync, mkdirSync, readdirSync, readFileSync, statSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { elapsedSeconds, parseExitRecord, readExitRecord, readExitRecordSync, tailLines } from '../../src/backends/exit-record.js';
import { archiveAttempt, TaskFinishedError, writeTaskFiles, writeTaskFilesSync } from '../../src/backends/task-files.js';
import { removeTempDirs, tempDir } from './helpers.js';

afterAll(removeTempDirs);

const GOOD = '{"exit_code":3,"start":"2024-05-01T10:00:00Z","end":"2024-05-01T11:30:00Z","host":"node1"}\n';

describe('exit records', () => {
  it('parses a complete record', async () => {
    expect(parseExitRecord(GOOD)).toEqual({ exit_code: 3, start: '2024-05-01T10:00:00Z', end: '2024-05-01T11:30:00Z', host: 'node1' });
    const dir = tempDir();
    writeFileSync(join(dir, 'exit.json'), GOOD);
    expect((await readExitRecord(dir))?.exit_code).toBe(3);
    // 1.5 hours between the ISO times (ISO 8601 arithmetic done by hand: 10:00 -> 11:30).
    expect(elapsedSeconds(readExitRecordSync(dir)!)).toBe(5400);
  });

  it('treats an absent, half-written or malformed record as absent', async () => {
    const dir = tempDir();
    expect(await readExitRecord(dir)).toBeUndefined();
    expect(readExitRecordSync(join(dir, 'no-such-dir'))).toBeUndefined();
    for (let cut = 0; cut < GOOD.length - 2; cut++) {
      writeFileSync(join(dir, 'exit.json'), GOOD.slice(0, cut));
      expect(await readExitRecord(dir), `cut at ${cut}`).toBeUndefined();
    }
    for (const bad of ['null', '[]', '{"exit_code":"0","start":"2024-01-01T00:00:00Z","end":"2024-01-01T00:00:00Z","host":"h"}', '{"exit_code":256,"start":"2024-01-01T00:00:00Z","end":"2024-01-01T00:00:00Z","host":"h"}', '{"exit_code":0,"start":"yesterday","end":"2024-01-01T00:00:00Z","host":"h"}', '{"exit_code":0,"start":"2024-01-01T00:00:00Z","end":"2024-01-01T00:00:00Z"}']) {
      expect(parseExitRecord(bad), bad).toBeUndefined();
    }
  });

  it('tails the last lines of a log, dropping a partial first line when the file is longer than the window', async () => {
    const dir = tempDir();
    const lines = Array.from({ length: 1000 }, (_, i) => `line ${i}`);
    writeFileSync(join(dir, 'stderr.log'), `${lines.join('\n')}\n`);
    expect(await tailLines(join(dir, 'stderr.log'), 3)).toBe('line 997\nline 998\nline 999');
    const small = await tailLines(join(dir, 'stderr.log'), 1000, 64);
    expect(small.split('\n').every((l) => lines.includes(l))).toBe(true);
    expect(await tailLines(join(dir, 'absent.log'))).toBe('');
  });
});

describe('task files', () => {
  it('writes run.sh (executable) and task.json atomically, leaving no temporary files', async () => {
    const root = tempDir();
    const dir = join(root, 'rounds', 'r0', 'label', '0000');
    await writeTaskFiles(dir, '#!/usr/bin/env bash\necho hi\n', { round: 0, inputs: { frames: '/a b' } });
    expect(readdirSync(dir).sort()).toEqual(['run.sh', 'task.json']);
    expect(statSync(join(dir, 'run.sh')).mode & 0o111).toBe(0o111);
    expect(JSON.parse(readFileSync(join(dir, 'task.json'), 'utf8'))).toEqual({ round: 0, inputs: { frames: '/a b' } });
    writeTaskFilesSync(dir, '#!/usr/bin/env bash\necho again\n', {});
    expect(readFileSync(join(dir, 'run.sh'), 'utf8')).toContain('again');
    expect(readdirSync(dir).sort()).toEqual(['run.sh', 'task.json']);
  });

  it('refuses to rewrite a finished task', async () => {
    const dir = tempDir();
    writeFileSync(join(dir, 'exit.json'), GOOD);
    await expect(writeTaskFiles(dir, 'x', {})).rejects.toThrow(TaskFinishedError);
    expect(() => writeTaskFilesSync(dir, 'x', {})).toThrow(/exit.json exists/);
    expect(existsSync(join(dir, 'run.sh'))).toBe(false);
  });

  it('archives attempts into attempts/1, attempts/2, ... and finishes an interrupted move', async () => {
    const dir = tempDir();
    expect(await archiveAttempt(dir)).toBeUndefined();
    for (const f of ['stdout.log', 'stderr.log', 'exit.json']) writeFileSync(join(dir, f), f === 'exit.json' ? GOOD : `${f} 1`);
    expect(await archiveAttempt(dir)).toBe(join(dir, 'attempts', '1'));
    expect(existsSync(join(dir, 'exit.json'))).toBe(false);
    expect(readFileSync(join(dir, 'attempts', '1', 'stdout.log'), 'utf8')).toBe('stdout.log 1');
    // A lost attempt (no exit record) goes to its own folder.
    writeFileSync(join(dir, 'stdout.log'), 'stdout.log 2');
    expect(await archiveAttempt(dir)).toBe(join(dir, 'attempts', '2'));
    // Attempt 3 was being archived when a crash struck: stdout.log moved, the rest not yet.
    for (const f of ['stderr.log', 'exit.json']) writeFileSync(join(dir, f), f === 'exit.json' ? GOOD : `${f} 3`);
    mkdirSync(join(dir, 'attempts', '3'));
    writeFileSync(join(dir, 'attempts', '3', 'stdout.log'), 'stdout.log 3');
    expect(await archiveAttempt(dir)).toBe(join(dir, 'attempts', '3'));
    expect(readdirSync(join(dir, 'attempts', '3')).sort()).toEqual(['exit.json', 'stderr.log', 'stdout.log']);
    expect(readdirSync(join(dir, 'attempts')).sort()).toEqual(['1', '2', '3']);
  });
});
