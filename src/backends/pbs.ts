/**
 * PBS Professional / OpenPBS: qsub to submit, `qstat -f -F json -x -t <ids>` for every job of a
 * campaign in one call (finished jobs included while the server keeps job history), qdel.
 * PBS has no dry-run submission: preflight renders the script and checks it with `bash -n` only.
 *
 * Sources: OpenPBS man pages in the openpbs/openpbs repository: qsub(1B) (doc/man1/qsub.1B at commit
 * 1dd4c360: job ids "<seq>.<server>", arrays "<seq>[].<server>", -J X-Y[:Z][%max]), qstat(1B)
 * (doc/man1/qstat.1B: -f, -F json with "Jobs" keyed by job id, -x finished jobs, -t subjobs "<seq>[<i>]",
 * job states B E F H M Q R S T U W X); the special exit values JOB_EXEC_* in src/include/job.h
 * (-1 .. -30; -27 mem, -26 vmem, -29 walltime); job attributes job_state, Exit_status, Job_Name,
 * comment, obittime (pbs_job_attributes(7B)). An Exit_status of 256 + n means the job was killed by
 * signal n (PBS Professional Administrator's Guide, "Job Exit Status"; from memory).
 */
import type { CommandOutcome } from './classify.js';
import { ClusterBackend, runChecked, type ClusterBackendOptions, type Dialect, type HistoryContext, type Mapped, type SchedJob } from './cluster.js';
import { pbsDirectives } from './directives.js';

/** PBS prints times as "Sun Oct  5 10:25:10 2025" (local time). */
export function parsePbsTime(s: unknown): number | undefined {
  if (typeof s === 'number') return s * 1000;
  if (typeof s !== 'string' || s.trim() === '') return undefined;
  const t = Date.parse(s);
  return Number.isNaN(t) ? undefined : t;
}

/** Parse `qstat -f -F json` output: one SchedJob per entry of "Jobs". */
export function parsePbsJson(stdout: string): SchedJob[] | undefined {
  const text = stdout.trim();
  if (text === '') return [];
  let v: unknown;
  try {
    v = JSON.parse(text);
  } catch {
    return undefined;
  }
  if (typeof v !== 'object' || v === null) return undefined;
  const jobs = (v as { Jobs?: Record<string, Record<string, unknown>> }).Jobs ?? {};
  const out: SchedJob[] = [];
  for (const [id, a] of Object.entries(jobs)) {
    if (typeof a !== 'object' || a === null) continue;
    const exit = a.Exit_status;
    const code = typeof exit === 'number' ? exit : typeof exit === 'string' && /^-?\d+$/.test(exit) ? Number(exit) : undefined;
    const end = parsePbsTime(a.obittime) ?? (a.job_state === 'F' || a.job_state === 'X' ? parsePbsTime(a.mtime) : undefined);
    out.push({
      id,
      state: String(a.job_state ?? ''),
      ...(code !== undefined ? { exitCode: code } : {}),
      ...(typeof a.comment === 'string' ? { reason: a.comment } : {}),
      ...(end !== undefined ? { end } : {}),
      ...(typeof a.Job_Name === 'string' ? { name: a.Job_Name } : {}),
    });
  }
  return out;
}

/** JOB_EXEC_* special exit values (OpenPBS src/include/job.h). */
const JOB_EXEC: Record<number, [string, 'node_failure' | 'preempted' | 'walltime' | 'out_of_memory' | 'failed']> = {
  [-1]: ['JOB_EXEC_FAIL1: execution failed before files, no retry', 'node_failure'],
  [-2]: ['JOB_EXEC_FAIL2: execution failed after files, no retry', 'node_failure'],
  [-3]: ['JOB_EXEC_RETRY: execution failed, retry', 'node_failure'],
  [-4]: ['JOB_EXEC_INITABT: aborted on MoM initialization', 'node_failure'],
  [-5]: ['JOB_EXEC_INITRST: aborted on MoM initialization, checkpoint', 'node_failure'],
  [-6]: ['JOB_EXEC_INITRMG: aborted on MoM initialization, checkpoint, migrate', 'node_failure'],
  [-7]: ['JOB_EXEC_BADRESRT: restart failed', 'node_failure'],
  [-10]: ['JOB_EXEC_FAILUID: invalid uid/gid for the job', 'failed'],
  [-11]: ['JOB_EXEC_RERUN: job rerun', 'preempted'],
  [-12]: ['JOB_EXEC_CHKP: checkpointed and killed', 'preempted'],
  [-13]: ['JOB_EXEC_FAIL_PASSWORD: bad password', 'failed'],
  [-14]: ['JOB_EXEC_RERUN_SIS_FAIL: rerun after a sister node failed', 'node_failure'],
  [-15]: ['JOB_EXEC_QUERST: requeued for restart from checkpoint', 'preempted'],
  [-16]: ['JOB_EXEC_FAILHOOK_RERUN: a hook rejected the job, requeued', 'node_failure'],
  [-17]: ['JOB_EXEC_FAILHOOK_DELETE: a hook rejected the job', 'failed'],
  [-18]: ['JOB_EXEC_HOOK_RERUN: a hook requeued the job', 'preempted'],
  [-19]: ['JOB_EXEC_HOOK_DELETE: a hook deleted the job', 'failed'],
  [-20]: ['JOB_EXEC_RERUN_MS_FAIL: the mother superior connection failed', 'node_failure'],
  [-21]: ['JOB_EXEC_FAIL_SECURITY: security breach in the PBS directory', 'failed'],
  [-22]: ['JOB_EXEC_HOOKERROR: a hook failed or timed out', 'failed'],
  [-23]: ['JOB_EXEC_FAIL_KRB5: no Kerberos credentials', 'failed'],
  [-24]: ['JOB_EXEC_KILL_NCPUS_BURST: exceeded ncpus (burst)', 'failed'],
  [-25]: ['JOB_EXEC_KILL_NCPUS_SUM: exceeded ncpus (sum)', 'failed'],
  [-26]: ['JOB_EXEC_KILL_VMEM: exceeded vmem', 'out_of_memory'],
  [-27]: ['JOB_EXEC_KILL_MEM: exceeded mem', 'out_of_memory'],
  [-28]: ['JOB_EXEC_KILL_CPUT: exceeded cput', 'failed'],
  [-29]: ['JOB_EXEC_KILL_WALLTIME: exceeded walltime', 'walltime'],
  [-30]: ['JOB_EXEC_JOINJOB: join job error', 'node_failure'],
};

/** A PBS job state and exit status in ratchet's terms. */
export function mapPbsState(job: SchedJob): Mapped {
  const s = job.state.toUpperCase();
  const note = job.reason ? ` (${job.reason})` : '';
  switch (s) {
    case 'Q':
    case 'H':
    case 'W':
    case 'T':
    case 'M':
      return { state: 'queued', final: false, ...(job.reason ? { reason: `PBS ${s}${note}` } : {}) };
    case 'R':
    case 'E':
    case 'S':
    case 'U':
    case 'B':
      return { state: 'running', final: false };
    case 'F':
    case 'X': {
      const c = job.exitCode;
      if (c === undefined) return { state: 'cancelled', final: true, reason: `PBS: finished without an exit status: deleted before it ran${note}` };
      if (c === 0) return { state: 'succeeded', final: true };
      if (c < 0) {
        const [what, state] = JOB_EXEC[c] ?? [`special exit value ${c}`, 'failed'];
        return { state, final: true, reason: `PBS: ${what}${note}` };
      }
      if (c >= 256) {
        const sig = c - 256;
        if (/walltime/i.test(job.reason ?? '')) return { state: 'walltime', final: true, reason: `PBS: killed by signal ${sig} at the walltime${note}` };
        if (sig === 15 || sig === 2 || sig === 1) return { state: 'cancelled', final: true, reason: `PBS: killed by signal ${sig} (qdel or a stop)${note}` };
        return { state: 'failed', final: true, reason: `PBS: killed by signal ${sig}${note}` };
      }
      return { state: 'failed', final: true, reason: `PBS: exit status ${c}${note}` };
    }
    default:
      return { state: 'running', final: false, reason: `PBS state ${job.state} (not known to ratchet; waiting)` };
  }
}

function isUnknownJobLine(line: string): boolean {
  return /Unknown Job Id|Job has finished|does not exist/i.test(line);
}

export class PbsDialect implements Dialect {
  readonly name = 'pbs' as const;
  readonly preflightNote = 'PBS has no command that validates a job without queueing it: scripts are rendered and checked with bash -n only';
  directives = pbsDirectives;

  submit(script: string, cwd: string) {
    return { cmd: 'qsub', args: [script], cwd };
  }

  /** qsub prints "<seq>.<server>", or "<seq>[].<server>" for an array. */
  parseSubmitId(stdout: string): string | undefined {
    const line = stdout.trim().split('\n').pop()?.trim() ?? '';
    return /^\d+(\[\])?(\.[A-Za-z0-9_.-]+)?$/.test(line) ? line : undefined;
  }

  elementId(arrayId: string, index: number): string {
    return arrayId.replace('[]', `[${index}]`);
  }

  queryIdOf(jobId: string): string {
    return jobId.replace(/\[\d+\]/, '[]');
  }

  query(ids: string[] | undefined) {
    return { cmd: 'qstat', args: ['-f', '-F', 'json', '-x', '-t', ...(ids ?? [])] };
  }

  parseQuery(o: CommandOutcome): SchedJob[] | undefined {
    const others = o.stderr.split('\n').filter((l) => l.trim() !== '' && !isUnknownJobLine(l));
    if (o.exitCode !== 0 && others.length > 0) return undefined;
    return parsePbsJson(o.stdout);
  }

  map = mapPbsState;

  /** Queued/running jobs of the user by name: qselect for the ids, then qstat for their names (two calls, only when submitting). */
  async liveByName(ctx: HistoryContext): Promise<Map<string, string>> {
    const sel = await runChecked(ctx, { cmd: 'qselect', args: ['-u', ctx.user, '-s', 'QHWRSTB'] });
    const ids = sel.stdout.split('\n').map((l) => l.trim()).filter((l) => l !== '');
    const out = new Map<string, string>();
    if (ids.length === 0) return out;
    const st = await ctx.cli.run({ cmd: 'qstat', args: ['-f', '-F', 'json', ...ids] });
    for (const j of parsePbsJson(st.stdout) ?? []) if (j.name) out.set(j.name, j.id);
    return out;
  }

  cancel(ids: string[]) {
    return { cmd: 'qdel', args: ids };
  }
}

export class PbsBackend extends ClusterBackend {
  constructor(o: ClusterBackendOptions = {}) {
    super(new PbsDialect(), o);
  }
}
