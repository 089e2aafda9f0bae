/**
 * Preflight: check the scripts of a step before anything is queued.
 *
 * Every task's script is rendered (errors name the task and field) and parsed with `bash -n`. Where
 * the scheduler can validate a job without queueing it (Slurm `sbatch --test-only`, Grid Engine
 * `qsub -w v`), one representative script per distinct request (same stage folder, same resources,
 * same array size) is sent to it: the request is what the scheduler judges, and the scripts of one
 * group differ only in their task values. PBS and LSF have no such command; they get rendering and
 * `bash -n` only, and the report says so.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { execa } from 'execa';
import PQueue from 'p-queue';
import type { Backend, TaskSpec } from './backend.js';
import { ClusterBackend } from './cluster.js';
import { classifyCommandFailure } from './classify.js';
import { SchedulerCommandError } from './scheduler-cli.js';

export interface PreflightProblem {
  /** "r<round>/<stage>". */
  stage: string;
  /** The task, or undefined for a problem of a whole group (named in `tasks`). */
  task?: string;
  /** Tasks a group problem applies to. */
  tasks?: string[];
  kind: 'render' | 'syntax' | 'scheduler';
  message: string;
}

export interface PreflightReport {
  backend: string;
  /** Tasks checked. */
  tasks: number;
  /** Scheduler validation calls made (0 where the scheduler has none). */
  schedulerChecks: number;
  /** What the scheduler could and could not check. */
  note: string;
  problems: PreflightProblem[];
}

const stageOf = (t: TaskSpec) => `r${t.round}/${t.stage}`;

/** `bash -n` on a script's text; undefined when it parses, else bash's message. */
export async function bashSyntax(script: string): Promise<string | undefined> {
  const r = await execa('bash', ['-n'], { input: script, reject: false, stripFinalNewline: true });
  return r.exitCode === 0 ? undefined : String(r.stderr || `bash -n exited ${r.exitCode}`).replace(/^bash: /gm, '');
}

/** Check the given tasks' scripts (nothing is queued, nothing is written to the task folders). */
export async function preflight(backend: Backend, tasks: TaskSpec[], o: { concurrency?: number } = {}): Promise<PreflightReport> {
  const problems: PreflightProblem[] = [];
  const scripts = new Map<string, string>();
  const queue = new PQueue({ concurrency: o.concurrency ?? 4 });
  for (const t of tasks) {
    let script: string;
    try {
      script = backend.render(t);
    } catch (err) {
      problems.push({ stage: stageOf(t), task: t.id, kind: 'render', message: (err as Error).message });
      continue;
    }
    scripts.set(t.id, script);
    void queue.add(async () => {
      const msg = await bashSyntax(script);
      if (msg) problems.push({ stage: stageOf(t), task: t.id, kind: 'syntax', message: msg });
    });
  }
  await queue.onIdle();

  let checks = 0;
  let note = 'local backend: scripts are rendered and checked with bash -n';
  if (backend instanceof ClusterBackend) {
    const d = backend.dialect;
    note = d.preflightNote;
    if (d.preflight) {
      const dir = mkdtempSync(join(tmpdir(), 'ratchet-preflight-'));
      try {
        const ok = tasks.filter((t) => scripts.has(t.id));
        for (const [i, unit] of backend.plan(ok).entries()) {
          const first = unit.tasks[0];
          const file = join(dir, `unit-${i}.sh`);
          writeFileSync(file, scripts.get(first.id)!, { mode: 0o755 });
          const array = unit.kind === 'array' ? { count: unit.tasks.length, throttle: backend.throttle } : undefined;
          const spec = d.preflight(file, dir, array);
          checks++;
          let message: string | undefined;
          try {
            const outcome = await backend.cli.runWithRetries(spec, (r) => (r.exitCode === 0 || classifyCommandFailure(r).kind === 'permanent' ? r : undefined));
            const text = `${outcome.stderr}\n${outcome.stdout}`.trim();
            if (outcome.exitCode !== 0 || /no suitable queue|error:/i.test(text)) message = text || `${spec.cmd} exited ${outcome.exitCode}`;
          } catch (err) {
            message = err instanceof SchedulerCommandError ? err.message : (err as Error).message;
          }
          if (message) {
            problems.push({
              stage: stageOf(first),
              tasks: unit.tasks.map((t) => t.id),
              kind: 'scheduler',
              message: `${d.name} rejects the request of ${unit.tasks.length === 1 ? first.id : `${unit.tasks.length} tasks (${first.id} ...)`}: ${message}`,
            });
          }
        }
      } finally {
        rmSync(dir, { recursive: true, force: true });
      }
    }
  }
  problems.sort((a, b) => (a.stage < b.stage ? -1 : a.stage > b.stage ? 1 : (a.task ?? '').localeCompare(b.task ?? '')));
  return { backend: backend.name, tasks: tasks.length, schedulerChecks: checks, note, problems };
}

/** Problems grouped by stage, for printing. */
export function problemsByStage(r: PreflightReport): Map<string, PreflightProblem[]> {
  const m = new Map<string, PreflightProblem[]>();
  for (const p of r.problems) {
    const list = m.get(p.stage) ?? [];
    list.push(p);
    m.set(p.stage, list);
  }
  return m;
}
