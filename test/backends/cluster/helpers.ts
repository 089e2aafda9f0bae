/**
 * Test helpers for the cluster backends: tasks with written task files, a fake scheduler command
 * runner that records every call, exit records written by hand.
 */
import { mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import type { ExitRecord, TaskSpec } from '../../../src/backends/backend.js';
import type { CommandOutcome } from '../../../src/backends/classify.js';
import type { CommandRunner, CommandSpec } from '../../../src/backends/scheduler-cli.js';
import { writeTaskFilesSync } from '../../../src/backends/task-files.js';

export { tempDir, removeTempDirs } from '../helpers.js';

/** A task of `stage` in round `round` under root/rounds/<round>/<stage>/<name>. */
export function task(root: string, name: string, over: Partial<TaskSpec> = {}): TaskSpec {
  const round = over.round ?? 0;
  const stage = over.stage ?? 'label';
  const dir = over.dir ?? join(root, 'rounds', String(round), stage, name);
  mkdirSync(dir, { recursive: true });
  return {
    id: `r${round}/${stage}/${name}`,
    round,
    stage,
    dir,
    command: 'true',
    setup: [],
    env: {},
    resources: { cpus: 1, gpus: 0, memory_mb: 100, walltime_s: 600 },
    name: `demo.r${round}/${stage}/${name}`,
    ...over,
  };
}

/** Render with the backend and write run.sh + task.json. */
export function writeTask(backend: { render(t: TaskSpec): string }, t: TaskSpec): TaskSpec {
  writeTaskFilesSync(t.dir, backend.render(t), { task: t.id });
  return t;
}

export function writeExit(dir: string, code: number, start = '2026-01-01T00:00:00Z', end = '2026-01-01T00:10:00Z'): ExitRecord {
  const r = { exit_code: code, start, end, host: 'node1' };
  writeFileSync(join(dir, 'exit.json'), `${JSON.stringify(r)}\n`);
  return r;
}

export type Handler = (args: string[], spec: CommandSpec) => Partial<CommandOutcome> | Promise<Partial<CommandOutcome>>;

/** A scheduler that exists only in this process: each command name has a handler; every call is logged. */
export function fakeRunner(handlers: Record<string, Handler>): { runner: CommandRunner; log: CommandSpec[]; count: (cmd: string) => number } {
  const log: CommandSpec[] = [];
  const runner: CommandRunner = async (spec) => {
    log.push(spec);
    const h = handlers[spec.cmd];
    if (!h) return { exitCode: null, stdout: '', stderr: '', timedOut: false, spawnError: `cannot run ${spec.cmd}: not found` };
    const r = await h(spec.args, spec);
    return { exitCode: 0, stdout: '', stderr: '', timedOut: false, ...r };
  };
  return { runner, log, count: (cmd) => log.filter((s) => s.cmd === cmd).length };
}

export const noSleep = async (): Promise<void> => {};
