/**
 * Writing a task directory's run.sh and task.json, and moving a finished attempt aside before a retry.
 * Each file is written to a temporary name and renamed into place, so a crash leaves either the old
 * file or the new one, never half of one.
 */
import { existsSync, mkdirSync, renameSync, writeFileSync } from 'node:fs';
import { mkdir, readdir, rename, writeFile } from 'node:fs/promises';
import { join } from 'node:path';
import { EXIT_RECORD_FILE, STDERR_FILE, STDOUT_FILE } from './exit-record.js';

export const SCRIPT_FILE = 'run.sh';
export const TASK_FILE = 'task.json';
/** Written by the local backend: "<pid> <host>" of the process running run.sh. */
export const LOCAL_PID_FILE = 'local.pid';
/** Where archiveAttempt moves earlier attempts: <task dir>/attempts/<n>/. */
export const ATTEMPTS_DIR = 'attempts';

/** A finished task's files may not be rewritten (its exit record is the authority). */
export class TaskFinishedError extends Error {
  constructor(readonly dir: string) {
    super(`${join(dir, EXIT_RECORD_FILE)} exists: the task has run; move the attempt aside (archiveAttempt) before writing it again`);
    this.name = 'TaskFinishedError';
  }
}

function taskJsonText(taskJson: unknown): string {
  return `${JSON.stringify(taskJson, null, 2)}\n`;
}

const tmpName = (file: string) => `.${file}.${process.pid}.tmp`;

/**
 * Create the task directory (and parents) and write run.sh (mode 0755) and task.json atomically.
 * Refuses (TaskFinishedError) when the directory already holds an exit record.
 */
export async function writeTaskFiles(dir: string, script: string, taskJson: unknown): Promise<void> {
  // mkdir returns the first folder it made: a new folder cannot hold an exit record.
  if ((await mkdir(dir, { recursive: true })) === undefined && existsSync(join(dir, EXIT_RECORD_FILE))) throw new TaskFinishedError(dir);
  await writeFile(join(dir, tmpName(TASK_FILE)), taskJsonText(taskJson));
  await writeFile(join(dir, tmpName(SCRIPT_FILE)), script, { mode: 0o755 });
  await rename(join(dir, tmpName(TASK_FILE)), join(dir, TASK_FILE));
  await rename(join(dir, tmpName(SCRIPT_FILE)), join(dir, SCRIPT_FILE));
}

/** Synchronous writeTaskFiles (faster for planning thousands of tasks in one go). */
export function writeTaskFilesSync(dir: string, script: string, taskJson: unknown): void {
  if (mkdirSync(dir, { recursive: true }) === undefined && existsSync(join(dir, EXIT_RECORD_FILE))) throw new TaskFinishedError(dir);
  writeFileSync(join(dir, tmpName(TASK_FILE)), taskJsonText(taskJson));
  writeFileSync(join(dir, tmpName(SCRIPT_FILE)), script, { mode: 0o755 });
  renameSync(join(dir, tmpName(TASK_FILE)), join(dir, TASK_FILE));
  renameSync(join(dir, tmpName(SCRIPT_FILE)), join(dir, SCRIPT_FILE));
}

/**
 * Move the last attempt's records (stdout.log, stderr.log, local.pid, then exit.json last) into
 * <dir>/attempts/<n>/ with n = 1, 2, ... the next free number, so the task can run again.
 * The exit record moves last: a crash half-way leaves the task still finished, and archiving again
 * completes the move into the same folder.
 * Returns the attempt folder, or undefined when there was nothing to move.
 */
export async function archiveAttempt(dir: string): Promise<string | undefined> {
  const present = [STDOUT_FILE, STDERR_FILE, LOCAL_PID_FILE, EXIT_RECORD_FILE].filter((f) => existsSync(join(dir, f)));
  if (present.length === 0) return undefined;
  const root = join(dir, ATTEMPTS_DIR);
  await mkdir(root, { recursive: true });
  const taken = (await readdir(root)).filter((n) => /^[1-9][0-9]*$/.test(n)).map(Number);
  const last = taken.length ? Math.max(...taken) : 0;
  // Finish an interrupted move: the last folder lacks the exit record and none of the files to move.
  const reuse =
    last > 0 &&
    present.includes(EXIT_RECORD_FILE) &&
    ![...present, EXIT_RECORD_FILE].some((f) => existsSync(join(root, String(last), f)));
  const target = join(root, String(reuse ? last : last + 1));
  await mkdir(target, { recursive: true });
  for (const f of present) await rename(join(dir, f), join(target, f));
  return target;
}
