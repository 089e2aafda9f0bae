/**
 * Where things live in a campaign directory. Task directories mirror task ids:
 * task "r0/label/0003" lives in rounds/r0/label/0003/. Paths here are relative to the campaign dir
 * (POSIX separators), as the ledger records them.
 */
import { join } from 'node:path';
import type { Stage } from './ids.js';

export const ROUNDS_DIR = 'rounds';

export function stageDirRel(round: number, stage: Stage): string {
  return `${ROUNDS_DIR}/r${round}/${stage}`;
}

export function taskDirRel(round: number, stage: Stage, name: string): string {
  return `${stageDirRel(round, stage)}/${name}`;
}

export function abs(campaignDir: string, rel: string): string {
  return join(campaignDir, ...rel.split('/'));
}

/** Files of a task directory. */
export const TASK_JSON = 'task.json';
export const RUN_SH = 'run.sh';
export const EXIT_JSON = 'exit.json';
export const STDOUT_LOG = 'stdout.log';
export const STDERR_LOG = 'stderr.log';
/** Earlier attempts' exit records and logs: <task dir>/attempts/<n>/. */
export const ATTEMPTS_DIR = 'attempts';

/** Plan folders of dry runs: .ratchet/plan/<time>/. */
export const PLAN_DIR = '.ratchet/plan';
