/**
 * `ratchet task CAMPAIGN TASK_ID`: one task as the ledger and its folder know it (read only, no lock):
 * its state and attempts, hold, command, the last lines of stderr.log and stdout.log, its exit record,
 * its job id, and the scheduler's own account of the job where the backend has one (best effort, one
 * command, clearly labelled; its absence or failure is said, never hidden). `follow` prints what the
 * task writes to its logs until its exit record appears.
 */
import { spawnSync } from 'node:child_process';
import { closeSync, openSync, readSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { readExitRecord, readExitRecordSync, STDERR_FILE, STDOUT_FILE, tailLines } from '../backends/exit-record.js';
import type { ExitRecord } from '../backends/backend.js';
import { CampaignError, loadCampaign } from '../campaign/load.js';
import { LedgerError } from '../ledger/journal.js';
import { parseTaskRef, taskId } from './ids.js';
import { abs, taskDirRel } from './layout.js';
import { stageRecord, taskPhase, type TaskPhase } from './state.js';
import { foldCampaign } from './status.js';
import { campaignView } from './view.js';

export interface TaskReport {
  task: string;
  dir: string;
  state: TaskPhase;
  held?: { how: 'stop' | 'cancelled'; by?: string; reason: string; at: string; release: string };
  command?: string;
  attempts: {
    n: number;
    job_id?: string;
    backend?: string;
    submitted_at?: string;
    state?: string;
    exit_code?: number;
    start?: string;
    end?: string;
    host?: string;
    reason?: string;
    why?: string;
  }[];
  exit?: ExitRecord;
  stderr: string;
  stdout: string;
  /** The scheduler's own account of the current job (command, its output), when the backend has one. */
  scheduler?: { command: string; output: string; ok: boolean };
}

/** The command that gives a scheduler's own account of one job (best effort). */
export function schedulerAccountCommand(backend: string, jobId: string): { cmd: string; args: string[] } | undefined {
  switch (backend) {
    case 'slurm':
      // sacct where accounting runs; scontrol otherwise (the controller keeps a job for MinJobAge).
      return { cmd: 'sh', args: ['-c', 'sacct -X -P -j "$1" -o JobID,JobName,State,ExitCode,Start,End,Elapsed,NodeList,Reason 2>/dev/null | grep . || scontrol show job "$1"', 'sh', jobId] };
    case 'pbs':
      return { cmd: 'qstat', args: ['-fx', jobId] };
    case 'lsf':
      return { cmd: 'bjobs', args: ['-l', jobId] };
    case 'sge': {
      const [num, idx] = jobId.split('.');
      return { cmd: 'sh', args: ['-c', 'qstat -j "$1" 2>/dev/null || qacct -j "$1" ${2:+-t "$2"}', 'sh', num, idx ?? ''] };
    }
    default:
      return undefined;
  }
}

export class TaskViewError extends Error {
  readonly exitCode = 2;
}

export async function taskReport(campaignArg: string, id: string, lines = 20, scheduler = true): Promise<TaskReport> {
  let view;
  try {
    view = campaignView(await loadCampaign(campaignArg, { checkFiles: false }));
  } catch (err) {
    if (err instanceof CampaignError) throw new TaskViewError(err.message);
    throw err;
  }
  const ref = parseTaskRef(id);
  if (!ref || ref.task === undefined) throw new TaskViewError(`expected a task like r0/label/0003, found ${JSON.stringify(id)}`);
  let state;
  try {
    state = (await foldCampaign(view.dir)).state;
  } catch (err) {
    if (err instanceof LedgerError) throw new TaskViewError(err.message);
    throw err;
  }
  const st = stageRecord(state, ref.round, ref.stage);
  const tid = taskId(ref.round, ref.stage, ref.task);
  if (!st) throw new TaskViewError(`${tid}: r${ref.round}/${ref.stage} has not been planned (ratchet status shows where the campaign stands)`);
  const t = st.tasks.find((k) => k.name === ref.task);
  if (!t) throw new TaskViewError(`${tid} is not a task of r${ref.round}/${ref.stage} (it has ${st.tasks.length} task(s))`);
  const dir = abs(view.dir, taskDirRel(t.round, t.stage, t.name));
  const cur = t.attempts[t.attempts.length - 1];
  const r: TaskReport = {
    task: t.id,
    dir,
    state: taskPhase(t),
    ...(view.stages[t.stage].command ? { command: view.stages[t.stage].command } : {}),
    attempts: t.attempts.map((a) => ({
      n: a.n,
      ...(a.job_id ? { job_id: a.job_id } : {}),
      ...(a.backend ? { backend: a.backend } : {}),
      ...(a.submitted_at ? { submitted_at: a.submitted_at } : {}),
      ...(a.ended
        ? { state: a.ended.state, exit_code: a.ended.exit_code, start: a.ended.start, end: a.ended.end, host: a.ended.host, ...(a.ended.reason ? { reason: a.ended.reason } : {}) }
        : {}),
      ...(a.reason ? { why: a.reason } : {}),
    })),
    stderr: await tailLines(join(dir, STDERR_FILE), lines, Math.max(8192, lines * 400)),
    stdout: await tailLines(join(dir, STDOUT_FILE), lines, Math.max(8192, lines * 400)),
  };
  if (t.held) r.held = { ...t.held, release: `ratchet retry ${campaignArg} ${t.id}` };
  const exit = await readExitRecord(dir);
  if (exit) r.exit = exit;
  const acct = scheduler && cur.job_id && cur.backend ? schedulerAccountCommand(cur.backend, cur.job_id) : undefined;
  if (acct) {
    const p = spawnSync(acct.cmd, acct.args, { encoding: 'utf8', timeout: 20_000 });
    const shown = acct.cmd === 'sh' ? acct.args[1].replace(/"\$1"/g, cur.job_id!).replace(/ \$\{2:\+-t "\$2"\}/, '') : `${acct.cmd} ${acct.args.join(' ')}`;
    r.scheduler = {
      command: shown,
      ok: p.status === 0,
      output: p.error ? `could not run it: ${p.error.message}` : `${p.stdout ?? ''}${p.stderr ?? ''}`.trimEnd(),
    };
  }
  return r;
}

export function formatTask(r: TaskReport, line: (s: string) => void): void {
  line(`task ${r.task}: ${r.held ? `held (${r.held.how === 'cancelled' ? 'cancelled by a person' : `stopped by ${r.held.by ?? 'a person'}`})` : r.state}`);
  line(`folder: ${r.dir}`);
  if (r.held) {
    line(`held: ${r.held.reason}`);
    line(`run it again with: ${r.held.release}`);
  }
  if (r.command) line(`command: ${r.command.split('\n').join('\n         ')}`);
  line('attempts:');
  for (const a of r.attempts) {
    const parts = [`  ${a.n}`];
    if (a.job_id) parts.push(`job ${a.job_id} (${a.backend ?? '?'})`);
    if (a.submitted_at) parts.push(`submitted ${a.submitted_at}`);
    parts.push(a.state ?? (a.job_id ? 'queued or running' : 'not started'));
    if (a.exit_code !== undefined) parts.push(`exit ${a.exit_code}`);
    if (a.start && a.end) parts.push(`${a.start} .. ${a.end}${a.host ? ` on ${a.host}` : ''}`);
    line(parts.join(', '));
    if (a.why) line(`     why this attempt: ${a.why.split('\n')[0]}`);
    if (a.reason) line(`     ${a.reason.split('\n')[0]}`);
  }
  line(r.exit ? `exit record: ${JSON.stringify(r.exit)}` : 'exit record: none yet');
  for (const [name, text] of [
    ['stderr.log', r.stderr],
    ['stdout.log', r.stdout],
  ] as const) {
    line(`--- last lines of ${name}${text ? '' : ' (empty or missing)'}`);
    if (text) for (const l of text.replace(/\n$/, '').split('\n')) line(l);
  }
  if (r.scheduler) {
    line(`--- the scheduler's own account (${r.scheduler.command})${r.scheduler.ok ? '' : ' [the command failed; its output follows]'}`);
    if (r.scheduler.output) for (const l of r.scheduler.output.split('\n')) line(l);
  }
}

/** Print what the task appends to stdout.log and stderr.log until its exit record appears (or `stopAfterMs`). */
export async function followTask(dir: string, write: (s: string) => void, opts: { intervalMs?: number; stopAfterMs?: number; isOver?: () => boolean } = {}): Promise<ExitRecord | undefined> {
  const offsets = new Map<string, number>();
  for (const f of [STDOUT_FILE, STDERR_FILE]) offsets.set(f, sizeOf(join(dir, f)));
  const until = opts.stopAfterMs === undefined ? Infinity : Date.now() + opts.stopAfterMs;
  for (;;) {
    const exit = readExitRecordSync(dir);
    for (const f of [STDOUT_FILE, STDERR_FILE]) {
      const path = join(dir, f);
      const size = sizeOf(path);
      let from = offsets.get(f) ?? 0;
      if (size < from) from = 0; // moved aside for a new attempt
      if (size > from) {
        const fd = openSync(path, 'r');
        try {
          const buf = Buffer.alloc(size - from);
          readSync(fd, buf, 0, buf.length, from);
          write(buf.toString('utf8'));
        } finally {
          closeSync(fd);
        }
        offsets.set(f, size);
      }
    }
    if (exit || Date.now() >= until || opts.isOver?.()) return exit;
    await new Promise((r) => setTimeout(r, opts.intervalMs ?? 500));
  }
}

function sizeOf(p: string): number {
  try {
    return statSync(p).size;
  } catch {
    return 0;
  }
}
