/**
 * IBM Spectrum LSF: `bsub < run.sh` to submit (bsub reads #BSUB lines only from a script on standard
 * input), `bjobs -a -noheader -o "<fields> delimiter='|'" <ids>` for every job of a campaign in one call
 * (finished jobs are listed for CLEAN_PERIOD, one hour by default), bkill. LSF has no dry-run
 * submission: preflight renders the script and checks it with `bash -n` only.
 *
 * Sources: IBM Spectrum LSF 10.1 command reference: bsub -J "name[1-N]%T" (job arrays with a slot
 * limit; indices start at 1), -n, -W [hour:]minute, -M (units from LSF 10.1.0.2), -o/-e with %J and %I,
 * the "Job <id> is submitted to queue <q>." message; bjobs -o (customized output, fields jobid,
 * jobindex, stat, exit_code, exit_reason, finish_time, job_name; delimiter='character'), -noheader, -a;
 * job states PEND RUN DONE EXIT PSUSP USUSP SSUSP UNKWN WAIT ZOMBI ("LSF terms and concepts");
 * termination reasons TERM_* ("Termination reasons displayed by bacct, bhist, and bjobs").
 * The exit_reason field name of bjobs -o is from memory of the 10.1 field list.
 */
import type { CommandOutcome } from './classify.js';
import { ClusterBackend, throwIfUnrunnable, type ClusterBackendOptions, type Dialect, type HistoryContext, type Mapped, type SchedJob } from './cluster.js';
import { lsfDirectives } from './directives.js';

export const BJOBS_FIELDS = 'jobid jobindex stat exit_code exit_reason finish_time job_name';
export const BJOBS_FORMAT = `${BJOBS_FIELDS} delimiter='|'`;

const MONTHS = ['Jan', 'Feb', 'Mar', 'Apr', 'May', 'Jun', 'Jul', 'Aug', 'Sep', 'Oct', 'Nov', 'Dec'];

/**
 * bjobs prints times as "Oct 22 09:22" (optionally with seconds, a year, and a trailing E/L/X flag);
 * without a year the date is taken in the current year, or last year if that would be in the future.
 */
export function parseLsfTime(s: string | undefined, now = Date.now()): number | undefined {
  if (!s) return undefined;
  const m = /^([A-Z][a-z]{2})\s+(\d{1,2})\s+(\d{1,2}):(\d{2})(?::(\d{2}))?(?:\s+(\d{4}))?/.exec(s.trim());
  if (!m) return undefined;
  const month = MONTHS.indexOf(m[1]);
  if (month < 0) return undefined;
  const year = m[6] ? Number(m[6]) : new Date(now).getFullYear();
  let t = new Date(year, month, Number(m[2]), Number(m[3]), Number(m[4]), Number(m[5] ?? 0)).getTime();
  if (!m[6] && t > now + 86400_000) t = new Date(year - 1, month, Number(m[2]), Number(m[3]), Number(m[4]), Number(m[5] ?? 0)).getTime();
  return t;
}

/** Parse `bjobs -noheader -o "<BJOBS_FORMAT>"` output. Array elements get the id "<jobid>[<index>]". */
export function parseBjobs(stdout: string, now = Date.now()): SchedJob[] {
  const jobs: SchedJob[] = [];
  for (const line of stdout.split('\n')) {
    if (line.trim() === '' || /^No (unfinished )?job found/i.test(line.trim())) continue;
    const f = line.split('|');
    if (f.length < 7) continue;
    const [jobid, index, stat, exit, reason, finish] = f.slice(0, 6).map((x) => x.trim());
    if (!/^\d+$/.test(jobid)) continue;
    const name = f.slice(6).join('|').trim();
    const code = /^-?\d+$/.test(exit) ? Number(exit) : undefined;
    const end = finish && finish !== '-' ? parseLsfTime(finish, now) : undefined;
    jobs.push({
      id: index && index !== '0' && index !== '-' ? `${jobid}[${index}]` : jobid,
      state: stat,
      ...(code !== undefined ? { exitCode: code } : {}),
      ...(reason && reason !== '-' ? { reason } : {}),
      ...(end !== undefined ? { end } : {}),
      ...(name && name !== '-' ? { name } : {}),
    });
  }
  return jobs;
}

/** An LSF job status (and termination reason) in ratchet's terms. */
export function mapLsfState(job: SchedJob): Mapped {
  const s = job.state.toUpperCase();
  const r = job.reason ?? '';
  switch (s) {
    case 'PEND':
    case 'PSUSP':
    case 'WAIT':
      return { state: 'queued', final: false, ...(r ? { reason: `LSF ${s}: ${r}` } : {}) };
    case 'RUN':
    case 'USUSP':
    case 'SSUSP':
    case 'PROV':
      return { state: 'running', final: false, ...(s !== 'RUN' ? { reason: `LSF ${s}` } : {}) };
    case 'UNKWN':
      return { state: 'running', final: false, reason: 'LSF UNKWN: the batch daemon lost contact with the execution host' };
    case 'ZOMBI':
      return { state: 'node_failure', final: true, reason: 'LSF ZOMBI: killed or requeued while its execution host was unreachable' };
    case 'DONE':
      return { state: 'succeeded', final: true };
    case 'EXIT': {
      const why = `LSF EXIT${job.exitCode !== undefined ? ` (exit code ${job.exitCode})` : ''}${r ? `: ${r}` : ''}`;
      if (/RUNLIMIT|run ?time limit|TERM_DEADLINE/i.test(r)) return { state: 'walltime', final: true, reason: why };
      if (/MEMLIMIT|SWAP|memory (usage )?limit/i.test(r)) return { state: 'out_of_memory', final: true, reason: why };
      if (/PREEMPT/i.test(r)) return { state: 'preempted', final: true, reason: why };
      if (/TERM_(FORCE_)?(OWNER|ADMIN)|killed by (owner|root)/i.test(r)) return { state: 'cancelled', final: true, reason: why };
      if (/TERM_(ZOMBIE|UNKNOWN|HOST|LOAD|RMS)|host/i.test(r)) return { state: 'node_failure', final: true, reason: why };
      return { state: 'failed', final: true, reason: why };
    }
    default:
      return { state: 'running', final: false, reason: `LSF status ${job.state} (not known to ratchet; waiting)` };
  }
}

export class LsfDialect implements Dialect {
  readonly name = 'lsf' as const;
  readonly preflightNote = 'LSF has no command that validates a job without queueing it: scripts are rendered and checked with bash -n only';
  directives = lsfDirectives;

  submit(script: string, cwd: string) {
    return { cmd: 'bsub', args: [], cwd, stdinFile: script };
  }

  /** "Job <1234> is submitted to queue <normal>." */
  parseSubmitId(stdout: string): string | undefined {
    return /Job <(\d+)> is submitted/.exec(stdout)?.[1];
  }

  elementId(arrayId: string, index: number): string {
    return `${arrayId}[${index}]`;
  }

  queryIdOf(jobId: string): string {
    return jobId.replace(/\[\d+\]$/, '');
  }

  query(ids: string[] | undefined, user: string) {
    return { cmd: 'bjobs', args: ['-a', '-noheader', '-o', BJOBS_FORMAT, ...(ids ?? ['-u', user])] };
  }

  parseQuery(o: CommandOutcome): SchedJob[] | undefined {
    const others = o.stderr.split('\n').filter((l) => l.trim() !== '' && !/is not found|No (unfinished )?job found/i.test(l));
    if (o.exitCode !== 0 && others.length > 0) return undefined;
    return parseBjobs(o.stdout);
  }

  map = mapLsfState;

  /** Unfinished jobs of the user by name (an array element's name "name[3]" counts as "name"). */
  async liveByName(ctx: HistoryContext): Promise<Map<string, string>> {
    const spec = { cmd: 'bjobs', args: ['-noheader', '-u', ctx.user, '-o', BJOBS_FORMAT] };
    const o = await ctx.cli.run(spec);
    throwIfUnrunnable(spec, o);
    const out = new Map<string, string>();
    for (const j of parseBjobs(o.stdout)) {
      if (!j.name || j.state === 'DONE' || j.state === 'EXIT') continue;
      out.set(j.name.replace(/\[\d+\]$/, ''), this.queryIdOf(j.id));
    }
    return out;
  }

  cancel(ids: string[]) {
    return { cmd: 'bkill', args: ids };
  }
}

export class LsfBackend extends ClusterBackend {
  constructor(o: ClusterBackendOptions = {}) {
    super(new LsfDialect(), o);
  }
}
