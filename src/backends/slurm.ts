/**
 * Slurm: sbatch to submit, squeue for every job of a campaign in one call, scancel, and
 * `sbatch --test-only` for preflight. Finished jobs are read from squeue while the controller keeps
 * them (MinJobAge), then from sacct where accounting runs, else from the job completion file
 * (jobcomp/filetxt) named by `scontrol show config`.
 *
 * Sources: the man pages of Slurm 22.05.8 (Debian slurm-client 22.05.8-4): sbatch(1) (--parsable,
 * --test-only, --array=<indexes>[%<max running>]), squeue(1) (-r/--array, -t all, -O/--Format fields
 * JobID, ArrayJobID, ArrayTaskID, State, Reason, exit_code, EndTime, Name; JOB STATE CODES), scancel(1),
 * sacct(1) (-P parsable, -X allocations); the jobcomp/filetxt line format as written by slurmctld
 * 22.05 (seen on the test cluster: "JobId=4 ... JobState=FAILED ... ArrayJobId=3 ArrayTaskId=1 ...
 * ExitCode=3:0", values not escaped).
 */
import { openSync, readSync, closeSync, fstatSync } from 'node:fs';
import type { CommandOutcome } from './classify.js';
import { ClusterBackend, runChecked, type ClusterBackendOptions, type Dialect, type HistoryContext, type Mapped, type SchedJob } from './cluster.js';
import { slurmDirectives } from './directives.js';

const FIELDS = ['JobID', 'ArrayJobID', 'ArrayTaskID', 'State', 'Reason', 'exit_code', 'EndTime', 'Name'] as const;
/** squeue -O format: each field followed by '|' (no width: the delimiter ends it; values are trimmed). */
export const SQUEUE_FORMAT = FIELDS.map((f) => `${f}:|`).join(',');

/** Slurm writes times as local "YYYY-MM-DDTHH:MM:SS"; "N/A", "NONE", "Unknown" mean none. */
export function parseSlurmTime(s: string | undefined): number | undefined {
  if (!s || !/^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}$/.test(s)) return undefined;
  const t = new Date(s).getTime(); // no zone: local time, as Slurm prints it
  return Number.isNaN(t) ? undefined : t;
}

/**
 * An exit code as Slurm prints it: "3:0" (code:signal, scontrol/sacct/jobcomp) or the raw wait status
 * (squeue -O exit_code: 768 = code 3; low 7 bits = the signal).
 */
export function parseSlurmExit(s: string | undefined): { code?: number; signal?: number } {
  if (!s) return {};
  let m = /^(\d+):(\d+)$/.exec(s.trim());
  if (m) return { code: Number(m[1]), signal: Number(m[2]) || undefined };
  m = /^(\d+)$/.exec(s.trim());
  if (m) {
    const v = Number(m[1]);
    const signal = v & 0x7f;
    return { code: (v >> 8) & 0xff, signal: signal || undefined };
  }
  return {};
}

/** The id ratchet records: "ARRAYID_INDEX" for an array element, else the job id. */
function recordedId(jobId: string, arrayJobId: string, arrayTaskId: string): string {
  return /^\d+$/.test(arrayTaskId) && /^\d+$/.test(arrayJobId) ? `${arrayJobId}_${arrayTaskId}` : jobId;
}

/** Parse `squeue -h -r -O <SQUEUE_FORMAT>` output. */
export function parseSqueue(stdout: string): SchedJob[] {
  const jobs: SchedJob[] = [];
  for (const raw of stdout.split('\n')) {
    if (raw.trim() === '') continue;
    // Every field, the last (Name) included, ends with the '|' suffix.
    const trimmed = raw.trimEnd();
    const line = trimmed.endsWith('|') ? trimmed.slice(0, -1) : trimmed;
    const f = line.split('|');
    if (f.length < FIELDS.length) continue;
    const [jobId, arrayJobId, arrayTaskId, state, reason, exit, end] = f.slice(0, 7).map((x) => x.trim());
    const name = f.slice(7).join('|').trim();
    const e = parseSlurmExit(exit);
    jobs.push({
      id: recordedId(jobId, arrayJobId, arrayTaskId),
      state: state.split(/\s+/)[0],
      ...(reason && reason !== 'None' ? { reason } : {}),
      ...(e.code !== undefined ? { exitCode: e.code } : {}),
      ...(e.signal !== undefined ? { signal: e.signal } : {}),
      ...(parseSlurmTime(end) !== undefined ? { end: parseSlurmTime(end) } : {}),
      ...(name ? { name } : {}),
    });
  }
  return jobs;
}

/** Parse `sacct -n -P -X -o JobID,State,ExitCode,End,JobName` output. */
export function parseSacct(stdout: string): SchedJob[] {
  const jobs: SchedJob[] = [];
  for (const line of stdout.split('\n')) {
    if (line.trim() === '') continue;
    const [id, state, exit, end, ...name] = line.split('|');
    if (!id || !state) continue;
    const e = parseSlurmExit(exit);
    jobs.push({
      id: id.trim(),
      state: state.trim().split(/\s+/)[0],
      ...(state.trim().includes(' by ') ? { reason: state.trim() } : {}),
      ...(e.code !== undefined ? { exitCode: e.code } : {}),
      ...(e.signal !== undefined ? { signal: e.signal } : {}),
      ...(parseSlurmTime(end?.trim()) !== undefined ? { end: parseSlurmTime(end?.trim()) } : {}),
      ...(name.length ? { name: name.join('|').trim() } : {}),
    });
  }
  return jobs;
}

/** Keys of a jobcomp/filetxt line, in the order slurmctld 22.05 writes them. */
const JOBCOMP_KEYS = [
  'JobId', 'UserId', 'GroupId', 'Name', 'JobState', 'Partition', 'TimeLimit', 'StartTime', 'EndTime', 'NodeList', 'NodeCnt', 'ProcCnt',
  'WorkDir', 'ReservationName', 'Tres', 'Account', 'QOS', 'WcKey', 'Cluster', 'SubmitTime', 'EligibleTime', 'ArrayJobId', 'ArrayTaskId',
  'HetJobId', 'HetJobOffset', 'DerivedExitCode', 'ExitCode',
];
const JOBCOMP_KEY = new RegExp(`(?:^| )(${JOBCOMP_KEYS.join('|')})=`, 'g');

/**
 * One line of the jobcomp/filetxt file as key -> value. Values are not escaped (a WorkDir may hold
 * spaces), so a value runs until the next known key.
 */
export function parseJobcompLine(line: string): Record<string, string> {
  const out: Record<string, string> = {};
  const marks: { key: string; at: number; value: number }[] = [];
  for (const m of line.matchAll(JOBCOMP_KEY)) marks.push({ key: m[1], at: m.index, value: m.index + m[0].length });
  for (let i = 0; i < marks.length; i++) {
    const end = i + 1 < marks.length ? marks[i + 1].at : line.length;
    if (!(marks[i].key in out)) out[marks[i].key] = line.slice(marks[i].value, end).trimEnd();
  }
  return out;
}

export function jobcompToJob(r: Record<string, string>): SchedJob | undefined {
  if (!r.JobId || !r.JobState) return undefined;
  const e = parseSlurmExit(r.ExitCode);
  return {
    id: recordedId(r.JobId, r.ArrayJobId ?? '', r.ArrayTaskId ?? ''),
    state: r.JobState.split(/\s+/)[0],
    // jobcomp writes ExitCode=0:0 for walltime kills and cancels: the state is what counts there.
    ...(e.code !== undefined ? { exitCode: e.code } : {}),
    ...(e.signal !== undefined ? { signal: e.signal } : {}),
    ...(parseSlurmTime(r.EndTime) !== undefined ? { end: parseSlurmTime(r.EndTime) } : {}),
    ...(r.Name ? { name: r.Name } : {}),
  };
}

const QUEUED = new Set(['PENDING', 'REQUEUED', 'REQUEUE_HOLD', 'REQUEUE_FED', 'RESV_DEL_HOLD', 'CONFIGURING', 'PD', 'RQ', 'RH', 'RF', 'RD', 'CF']);
const RUNNING = new Set(['RUNNING', 'COMPLETING', 'SUSPENDED', 'STOPPED', 'SIGNALING', 'STAGE_OUT', 'RESIZING', 'R', 'CG', 'S', 'ST', 'SI', 'SO', 'RS']);
/** Pending reasons after which the job will never start by itself (squeue(1) JOB REASON CODES). */
const NEVER = /DependencyNeverSatisfied|BadConstraints|PartitionConfig|PartitionDown|InvalidAccount|InvalidQOS|ReqNodeNotAvail|QOSMax.*PerJob|AssocMax.*PerJob|PartitionTimeLimit|PartitionNodeLimit/;

/** A Slurm job state (squeue(1) JOB STATE CODES, Slurm 22.05) in ratchet's terms. */
export function mapSlurmState(job: SchedJob): Mapped {
  const s = job.state.toUpperCase();
  const exit = job.exitCode !== undefined ? ` (exit code ${job.exitCode}${job.signal ? `, signal ${job.signal}` : ''})` : '';
  if (QUEUED.has(s)) {
    const never = job.reason && NEVER.test(job.reason);
    return { state: 'queued', final: false, ...(job.reason ? { reason: never ? `pending: ${job.reason}: it will not start by itself (fix the request or cancel it)` : `pending: ${job.reason}` } : {}) };
  }
  if (RUNNING.has(s)) return { state: 'running', final: false, ...(s !== 'RUNNING' && s !== 'R' ? { reason: s.toLowerCase() } : {}) };
  switch (s) {
    case 'COMPLETED':
    case 'CD':
      return { state: 'succeeded', final: true };
    case 'FAILED':
    case 'F':
    case 'SPECIAL_EXIT':
    case 'SE':
      return { state: 'failed', final: true, reason: `Slurm: ${s}${job.reason ? ` ${job.reason}` : ''}${exit}` };
    case 'TIMEOUT':
    case 'TO':
      return { state: 'walltime', final: true, reason: 'Slurm: TIMEOUT, the job reached its time limit' };
    case 'OUT_OF_MEMORY':
    case 'OOM':
      return { state: 'out_of_memory', final: true, reason: 'Slurm: OUT_OF_MEMORY, the job exceeded its memory' };
    case 'NODE_FAIL':
    case 'NF':
    case 'BOOT_FAIL':
    case 'BF':
      return { state: 'node_failure', final: true, reason: `Slurm: ${s}` };
    case 'PREEMPTED':
    case 'PR':
      return { state: 'preempted', final: true, reason: 'Slurm: PREEMPTED' };
    case 'CANCELLED':
    case 'CA':
    case 'REVOKED':
    case 'RV':
    case 'DEADLINE':
    case 'DL':
      return { state: 'cancelled', final: true, reason: `Slurm: ${s}${job.reason && job.reason !== 'None' ? ` (${job.reason})` : ''}` };
    default:
      return { state: 'running', final: false, reason: `Slurm state ${job.state} (not known to ratchet; waiting)` };
  }
}

/** Read the job completion file from `offset` on; returns the jobs found and the new offset. */
function readJobcomp(path: string, offset: number, into: Map<string, SchedJob>): number {
  let fd: number;
  try {
    fd = openSync(path, 'r');
  } catch {
    return offset;
  }
  try {
    const size = fstatSync(fd).size;
    if (size < offset) offset = 0; // the file was rotated
    if (size === offset) return offset;
    const buf = Buffer.alloc(size - offset);
    readSync(fd, buf, 0, buf.length, offset);
    const text = buf.toString('utf8');
    const complete = text.lastIndexOf('\n') + 1; // a half-written last line waits for the next read
    for (const line of text.slice(0, complete).split('\n')) {
      const j = line.trim() ? jobcompToJob(parseJobcompLine(line)) : undefined;
      if (j) into.set(j.id, j);
    }
    return offset + Buffer.byteLength(text.slice(0, complete));
  } finally {
    closeSync(fd);
  }
}

export interface SlurmDialectOptions {
  /** Path of the job completion file (default: JobCompLoc from `scontrol show config` when JobCompType is jobcomp/filetxt). */
  jobcompFile?: string;
}

export class SlurmDialect implements Dialect {
  readonly name = 'slurm' as const;
  readonly preflightNote = 'sbatch --test-only: the controller checks partition, account, qos, limits and the array size without queueing';
  private sacct: 'unknown' | 'yes' | 'no' = 'unknown';
  private jobcompPath?: string | null;
  private jobcompOffset = 0;
  private readonly jobcomp = new Map<string, SchedJob>();

  constructor(private readonly o: SlurmDialectOptions = {}) {
    if (o.jobcompFile !== undefined) this.jobcompPath = o.jobcompFile;
  }

  directives = slurmDirectives;

  submit(script: string, cwd: string) {
    return { cmd: 'sbatch', args: ['--parsable', script], cwd };
  }

  /** sbatch --parsable prints "<jobid>" or "<jobid>;<cluster>". */
  parseSubmitId(stdout: string): string | undefined {
    const line = stdout.trim().split('\n').pop()?.trim() ?? '';
    const m = /^(\d+)(?:;\S+)?$/.exec(line);
    return m ? m[1] : undefined;
  }

  elementId(arrayId: string, index: number): string {
    return `${arrayId}_${index}`;
  }

  queryIdOf(jobId: string): string {
    return jobId.replace(/_\d+$/, '');
  }

  query(ids: string[] | undefined, user: string) {
    const sel = ids === undefined ? ['-u', user] : ['-j', ids.join(',')];
    return { cmd: 'squeue', args: ['-h', '-r', '-t', 'all', ...sel, '-O', SQUEUE_FORMAT] };
  }

  parseQuery(o: CommandOutcome): SchedJob[] | undefined {
    if (o.exitCode === 0) return parseSqueue(o.stdout);
    // A single id the controller has purged: "slurm_load_jobs error: Invalid job id specified".
    if (/Invalid job id specified/i.test(o.stderr)) return [];
    return undefined;
  }

  map = mapSlurmState;

  async history(ids: string[], ctx: HistoryContext): Promise<Map<string, SchedJob>> {
    const found = new Map<string, SchedJob>();
    if (this.sacct !== 'no') {
      const o = await ctx.cli.run({ cmd: 'sacct', args: ['-n', '-P', '-X', '-j', ids.join(','), '-o', 'JobID,State,ExitCode,End,JobName'] });
      const text = `${o.stdout}\n${o.stderr}`;
      if (o.spawnError !== undefined || /accounting storage is disabled|slurmdbd|not running a supported accounting_storage/i.test(text)) this.sacct = 'no';
      else if (o.exitCode === 0) {
        this.sacct = 'yes';
        for (const j of parseSacct(o.stdout)) found.set(j.id, j);
      }
    }
    if (this.sacct === 'no') {
      if (this.jobcompPath === undefined) this.jobcompPath = await this.findJobcomp(ctx);
      if (this.jobcompPath) this.jobcompOffset = readJobcomp(this.jobcompPath, this.jobcompOffset, this.jobcomp);
      for (const id of ids) {
        const j = this.jobcomp.get(id);
        if (j) found.set(id, j);
      }
    }
    return found;
  }

  private async findJobcomp(ctx: HistoryContext): Promise<string | null> {
    const o = await ctx.cli.run({ cmd: 'scontrol', args: ['show', 'config'] });
    if (o.exitCode !== 0) return null;
    const type = /^JobCompType\s*=\s*(\S+)/m.exec(o.stdout)?.[1];
    const loc = /^JobCompLoc\s*=\s*(.+?)\s*$/m.exec(o.stdout)?.[1];
    return type === 'jobcomp/filetxt' && loc && loc.startsWith('/') ? loc : null;
  }

  async liveByName(ctx: HistoryContext): Promise<Map<string, string>> {
    const spec = { cmd: 'squeue', args: ['-h', '-r', '-u', ctx.user, '-t', 'PD,R,CF,S,ST', '-o', '%F|%j'] };
    const o = await runChecked(ctx, spec);
    const out = new Map<string, string>();
    for (const line of o.stdout.split('\n')) {
      const [id, ...name] = line.split('|');
      if (id && /^\d+$/.test(id.trim()) && name.length) out.set(name.join('|').trim(), id.trim());
    }
    return out;
  }

  cancel(ids: string[]) {
    return { cmd: 'scancel', args: ids };
  }

  preflight(script: string, cwd: string, array?: { count: number; throttle?: number }) {
    const extra = array && array.count > 1 ? [`--array=1-${array.count}${array.throttle ? `%${array.throttle}` : ''}`] : [];
    return { cmd: 'sbatch', args: ['--test-only', ...extra, script], cwd };
  }
}

export interface SlurmBackendOptions extends ClusterBackendOptions, SlurmDialectOptions {}

export class SlurmBackend extends ClusterBackend {
  constructor(o: SlurmBackendOptions = {}) {
    super(new SlurmDialect(o), o);
  }
}
