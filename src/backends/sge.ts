/**
 * Grid Engine (Son of Grid Engine / Univa-style `qsub`): `qsub -terse` to submit, `qstat -u <user>` for
 * all of a campaign's live jobs in one call, `qacct -j` for jobs that left the queue without an exit
 * record (one call per job number, only then), qdel, and `qsub -w v` for preflight (verify: "does not
 * submit the job but prints a validation report based on a dry scheduling run on an empty cluster").
 *
 * Sources: man pages of Son of Grid Engine 8.1.9 (Debian gridengine-client 8.1.9+dfsg-10):
 * sge_submit(1) (qsub -terse prints the job id, "<id>.<first>-<last>:<step>" for arrays; -t n-m; -tc;
 * -w e|w|n|p|v; SGE_TASK_ID), qstat(1) ("Reduced Format": job-ID, prior, name, user, state,
 * submit/start at, queue, slots, ja-task-ID; job states d E h q r R s S t T w z; -r prints
 * "Full jobname:"), sge_status(5) (the "failed" codes of qacct: 37 "qmaster enforced h_rt, h_cpu, or
 * h_vmem limit", 17 "through signal", 100 "assumedly after job", 24/25 migrating/rescheduling ...),
 * sge_accounting(5) (exit_status 128 + signal), qacct(1) (-j), sge_types(5) (job_id -t range for qdel).
 * The qacct -j layout ("key value" lines between "====" rules) is from memory of 8.1.9 output.
 */
import type { CommandOutcome } from './classify.js';
import { ClusterBackend, throwIfUnrunnable, type ClusterBackendOptions, type Dialect, type HistoryContext, type Mapped, type SchedJob } from './cluster.js';
import { sgeDirectives, type ArrayRequest } from './directives.js';

/** "2-10:2", "3", "1-4:1,7" -> the task numbers. */
export function expandTaskRange(spec: string): number[] {
  const out: number[] = [];
  for (const part of spec.split(',')) {
    const m = /^(\d+)(?:-(\d+)(?::(\d+))?)?$/.exec(part.trim());
    if (!m) continue;
    const a = Number(m[1]);
    const b = m[2] === undefined ? a : Number(m[2]);
    const step = m[3] === undefined ? 1 : Math.max(1, Number(m[3]));
    for (let i = a; i <= b && out.length < 1_000_000; i += step) out.push(i);
  }
  return out;
}

/** Grid Engine prints dates as "12/01/2026 22:56:44" (MM/DD/YYYY, local). */
function parseQstatDate(date: string, time: string): number | undefined {
  const m = /^(\d{2})\/(\d{2})\/(\d{4})$/.exec(date);
  const t = /^(\d{2}):(\d{2}):(\d{2})$/.exec(time);
  if (!m || !t) return undefined;
  return new Date(Number(m[3]), Number(m[1]) - 1, Number(m[2]), Number(t[1]), Number(t[2]), Number(t[3])).getTime();
}

/**
 * Parse qstat's reduced format. An array's pending tasks share one line with a task range; each is
 * listed under its own id "<job>.<task>".
 */
export function parseQstat(stdout: string): SchedJob[] {
  const jobs: SchedJob[] = [];
  for (const line of stdout.split('\n')) {
    const f = line.trim().split(/\s+/);
    if (f.length < 7 || !/^\d+$/.test(f[0])) continue;
    const [id, , name, , state, date, time, ...rest] = f;
    let tasks: string | undefined;
    // rest: [queue@host] slots [ja-task-ID]
    if (rest.length > 0 && rest[0].includes('@')) rest.shift();
    if (rest.length >= 2) tasks = rest[1];
    if (parseQstatDate(date, time) === undefined) continue;
    if (tasks === undefined) jobs.push({ id, state, name });
    else for (const k of expandTaskRange(tasks)) jobs.push({ id: `${id}.${k}`, state, name });
  }
  return jobs;
}

/** Parse `qstat -u <user> -r`: job id -> full job name ("Full jobname:" lines follow their job's line). */
export function parseQstatFullNames(stdout: string): Map<string, string> {
  const out = new Map<string, string>();
  let current: string | undefined;
  for (const line of stdout.split('\n')) {
    const f = line.trim().split(/\s+/);
    if (f.length >= 7 && /^\d+$/.test(f[0])) {
      current = f[0];
      continue;
    }
    const m = /^\s*Full jobname:\s*(.+?)\s*$/.exec(line);
    if (m && current !== undefined) out.set(m[1], current);
  }
  return out;
}

/** One "====" block of `qacct -j` output as key -> value. */
export function parseQacct(stdout: string): Record<string, string>[] {
  const blocks: Record<string, string>[] = [];
  let cur: Record<string, string> | undefined;
  for (const line of stdout.split('\n')) {
    if (/^={5,}\s*$/.test(line)) {
      cur = {};
      blocks.push(cur);
      continue;
    }
    const m = /^(\S+)\s+(.*?)\s*$/.exec(line);
    if (m && cur) cur[m[1]] = m[2];
  }
  return blocks.filter((b) => Object.keys(b).length > 0);
}

/** A qacct record as a SchedJob with state "ACCT"; exitCode = exit_status; reason = the failed code and text. */
export function qacctToJob(r: Record<string, string>): SchedJob | undefined {
  const job = r.jobnumber;
  if (!job || !/^\d+$/.test(job)) return undefined;
  const task = r.taskid && /^\d+$/.test(r.taskid) ? r.taskid : undefined;
  const end = r.end_time ? Date.parse(r.end_time) : NaN;
  const exit = /^-?\d+/.exec(r.exit_status ?? '')?.[0];
  const failed = (r.failed ?? '0').trim();
  const wall = /^(\d+(?:\.\d+)?)/.exec(r.ru_wallclock ?? '')?.[1];
  const hrt = /h_rt=(\d+)/.exec(r.category ?? '')?.[1];
  return {
    id: task ? `${job}.${task}` : job,
    state: 'ACCT',
    ...(exit !== undefined ? { exitCode: Number(exit) } : {}),
    reason: `failed ${failed}${wall !== undefined ? `; ru_wallclock ${wall}` : ''}${hrt !== undefined ? `; h_rt ${hrt}` : ''}`,
    ...(Number.isNaN(end) ? {} : { end }),
    ...(r.jobname ? { name: r.jobname } : {}),
  };
}

/** A Grid Engine state (qstat letters, or a qacct record) in ratchet's terms. */
export function mapSgeState(job: SchedJob): Mapped {
  if (job.state === 'ACCT') {
    const m = /^failed (\d+)/.exec(job.reason ?? '');
    const failed = m ? Number(m[1]) : 0;
    const code = job.exitCode;
    const note = `Grid Engine accounting: ${job.reason ?? ''}${code !== undefined ? `, exit_status ${code}` : ''}`;
    if (failed === 0) return code === 0 ? { state: 'succeeded', final: true } : { state: 'failed', final: true, reason: note };
    if (failed === 37) {
      // "qmaster enforced h_rt, h_cpu, or h_vmem limit": walltime when the run reached h_rt, else memory.
      const wall = Number(/ru_wallclock (\d+(?:\.\d+)?)/.exec(job.reason ?? '')?.[1]);
      const hrt = Number(/h_rt (\d+)/.exec(job.reason ?? '')?.[1]);
      if (Number.isFinite(wall) && Number.isFinite(hrt) && wall < hrt) return { state: 'out_of_memory', final: true, reason: `${note} (before h_rt: the h_vmem limit)` };
      return { state: 'walltime', final: true, reason: `${note} (h_rt)` };
    }
    if (failed === 17) return { state: 'cancelled', final: true, reason: `${note} (killed through a signal, possibly qdel)` };
    if (failed === 24 || failed === 25) return { state: 'preempted', final: true, reason: `${note} (migrated or rescheduled)` };
    if (failed === 26 || failed === 27 || failed === 28) return { state: 'failed', final: true, reason: `${note} (output file, shell or working directory problem)` };
    if (failed === 100) return { state: 'failed', final: true, reason: `${note} (killed by a signal, perhaps for exceeding resources, or the node crashed)` };
    return { state: 'node_failure', final: true, reason: `${note} (the job could not be started or finished on its host)` };
  }
  const s = job.state;
  const id = job.id.split('.')[0];
  if (s.includes('E')) return { state: 'queued', final: false, reason: `Grid Engine ${s}: error state, it will not start (see qstat -j ${id}; clear it with qmod -cj or delete it with qdel)` };
  if (s.includes('d')) return { state: 'running', final: false, reason: `Grid Engine ${s}: being deleted` };
  if (s.includes('r') || s.includes('t')) return { state: 'running', final: false, ...(/[sST]/.test(s) ? { reason: `Grid Engine ${s}: suspended` } : {}) };
  if (/[sST]/.test(s)) return { state: 'running', final: false, reason: `Grid Engine ${s}: suspended` };
  if (/[qwh]/.test(s)) return { state: 'queued', final: false, ...(s.includes('h') ? { reason: `Grid Engine ${s}: on hold` } : {}) };
  return { state: 'running', final: false, reason: `Grid Engine state ${s} (not known to ratchet; waiting)` };
}

export class SgeDialect implements Dialect {
  readonly name = 'sge' as const;
  readonly preflightNote = 'qsub -w v: verifies the request against the cluster configuration (an empty cluster, load ignored) without submitting';

  constructor(private readonly pe = 'smp') {}

  directives = (r: Parameters<typeof sgeDirectives>[0], name: string, array?: ArrayRequest) => sgeDirectives(r, name, array, this.pe);

  submit(script: string, cwd: string) {
    return { cmd: 'qsub', args: ['-terse', script], cwd };
  }

  /** "123", or "123.1-10:1" for an array. */
  parseSubmitId(stdout: string): string | undefined {
    const line = stdout.trim().split('\n').pop()?.trim() ?? '';
    return /^(\d+)(?:\.\d+-\d+:\d+)?$/.exec(line)?.[1];
  }

  elementId(arrayId: string, index: number): string {
    return `${arrayId}.${index}`;
  }

  queryIdOf(jobId: string): string {
    return jobId.split('.')[0];
  }

  /** qstat lists by user (it has no list-of-ids filter in this format); ids are matched afterwards. */
  query(_ids: string[] | undefined, user: string) {
    return { cmd: 'qstat', args: ['-u', user] };
  }

  parseQuery(o: CommandOutcome): SchedJob[] | undefined {
    if (o.exitCode !== 0) return undefined;
    return parseQstat(o.stdout);
  }

  map = mapSgeState;

  /** qacct -j <job number> for each job number among the ids (an array is one call). */
  async history(ids: string[], ctx: HistoryContext): Promise<Map<string, SchedJob>> {
    const found = new Map<string, SchedJob>();
    for (const job of new Set(ids.map((id) => this.queryIdOf(id)))) {
      const o = await ctx.cli.run({ cmd: 'qacct', args: ['-j', job] });
      if (o.exitCode !== 0) continue;
      for (const r of parseQacct(o.stdout)) {
        const j = qacctToJob(r);
        if (j) found.set(j.id, j); // a later record (a rerun) replaces an earlier one
      }
    }
    return found;
  }

  async liveByName(ctx: HistoryContext): Promise<Map<string, string>> {
    const spec = { cmd: 'qstat', args: ['-u', ctx.user, '-r'] };
    const o = await ctx.cli.run(spec);
    throwIfUnrunnable(spec, o);
    return o.exitCode === 0 ? parseQstatFullNames(o.stdout) : new Map();
  }

  /** qdel <job> [-t <first>-<last>] per job number (Grid Engine addresses array tasks by range). */
  cancel(ids: string[]) {
    const byJob = new Map<string, number[]>();
    for (const id of ids) {
      const [job, task] = id.split('.');
      const list = byJob.get(job) ?? [];
      if (task !== undefined) list.push(Number(task));
      byJob.set(job, list);
    }
    return [...byJob].map(([job, tasks]) => ({
      cmd: 'qdel',
      args: tasks.length ? [job, '-t', `${Math.min(...tasks)}-${Math.max(...tasks)}`] : [job],
    }));
  }

  preflight(script: string, cwd: string, array?: ArrayRequest) {
    const extra = array && array.count > 1 ? ['-t', `1-${array.count}`] : [];
    return { cmd: 'qsub', args: ['-w', 'v', ...extra, script], cwd };
  }
}

export interface SgeBackendOptions extends ClusterBackendOptions {
  /** Parallel environment for tasks with more than one cpu (site-specific; default "smp"). */
  pe?: string;
}

export class SgeBackend extends ClusterBackend {
  constructor(o: SgeBackendOptions = {}) {
    super(new SgeDialect(o.pe), o);
  }
}
