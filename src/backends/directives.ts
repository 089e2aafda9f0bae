/**
 * Scheduler directive lines from a task's resources: one pure function per scheduler.
 *
 * Syntax follows each scheduler's manual (sources beside each function). Values that reach a directive
 * line (partition/queue, account, qos) are checked against a conservative character set, because a
 * directive line is parsed by the scheduler, not by bash, and cannot be quoted portably.
 * Raw `scheduler_lines` from the campaign are copied as written; a line without a leading '#' gets
 * the scheduler's prefix (so "--constraint=v100" becomes "#SBATCH --constraint=v100").
 */
import type { Resources } from './backend.js';

export type SchedulerName = 'slurm' | 'pbs' | 'lsf' | 'sge';

/** Array part of a submission: elements 1..count, at most `throttle` running at once. */
export interface ArrayRequest {
  count: number;
  throttle?: number;
}

/** A resource that a scheduler cannot express, or a value a directive line cannot hold (exit code 2). */
export class DirectiveError extends Error {
  readonly exitCode = 2;
  constructor(
    readonly field: string,
    detail: string,
  ) {
    super(`${field}: ${detail}`);
    this.name = 'DirectiveError';
  }
}

export const DIRECTIVE_PREFIX: Record<SchedulerName, string> = {
  slurm: '#SBATCH',
  pbs: '#PBS',
  lsf: '#BSUB',
  sge: '#$',
};

/** Characters accepted in a partition/queue, account or qos name (common practice: site names are plain words). */
const NAME_VALUE = /^[A-Za-z0-9_.,:@+%=-]+$/;

function checkName(field: string, value: string | undefined): string | undefined {
  if (value === undefined) return undefined;
  if (!NAME_VALUE.test(value)) {
    throw new DirectiveError(field, `expected a name of letters, digits and _ . , : @ + % = - (it goes on a scheduler directive line), found ${JSON.stringify(value)}`);
  }
  return value;
}

function checkCommon(r: Resources, name: string, array?: ArrayRequest): void {
  if (!Number.isInteger(r.cpus) || r.cpus < 1) throw new DirectiveError('resources.cpus', `expected a whole number of at least 1, found ${r.cpus}`);
  if (!Number.isInteger(r.gpus) || r.gpus < 0) throw new DirectiveError('resources.gpus', `expected a whole number of at least 0, found ${r.gpus}`);
  if (!Number.isFinite(r.walltime_s) || r.walltime_s <= 0) throw new DirectiveError('resources.walltime', `expected a walltime above 0 seconds, found ${r.walltime_s}`);
  if (r.memory_mb !== undefined && (!Number.isFinite(r.memory_mb) || r.memory_mb <= 0)) {
    throw new DirectiveError('resources.memory', `expected a memory size above 0 MiB, found ${r.memory_mb}`);
  }
  if (!/^[A-Za-z][A-Za-z0-9_.-]*$/.test(name)) throw new DirectiveError('name', `expected a sanitized job name, found ${JSON.stringify(name)}`);
  if (array) {
    if (!Number.isInteger(array.count) || array.count < 1) throw new DirectiveError('array', `expected at least 1 element, found ${array.count}`);
    if (array.throttle !== undefined && (!Number.isInteger(array.throttle) || array.throttle < 1)) {
      throw new DirectiveError('backend.array_throttle', `expected a whole number of at least 1, found ${array.throttle}`);
    }
  }
}

/** Whole minutes, rounded up (LSF -W takes [hour:]minute). */
function ceilMinutes(seconds: number): number {
  return Math.max(1, Math.ceil(seconds / 60));
}

/** HH:MM:SS with unbounded hours, seconds rounded up. */
export function hhmmss(seconds: number): string {
  const s = Math.max(0, Math.ceil(seconds));
  const two = (n: number) => String(n).padStart(2, '0');
  return `${two(Math.floor(s / 3600))}:${two(Math.floor((s % 3600) / 60))}:${two(s % 60)}`;
}

/** D-HH:MM:SS when a day or more (Slurm's --time forms), else HH:MM:SS. */
export function slurmTime(seconds: number): string {
  const s = Math.max(0, Math.ceil(seconds));
  if (s < 86400) return hhmmss(s);
  const two = (n: number) => String(n).padStart(2, '0');
  const days = Math.floor(s / 86400);
  const rest = s % 86400;
  return `${days}-${two(Math.floor(rest / 3600))}:${two(Math.floor((rest % 3600) / 60))}:${two(rest % 60)}`;
}

/** The campaign's raw extra directives, each given the scheduler's prefix when it has no leading '#'. */
export function extraLines(scheduler: SchedulerName, extra: string[] | undefined): string[] {
  return (extra ?? []).map((line, i) => {
    if (/[\r\n\0]/.test(line)) throw new DirectiveError(`resources.scheduler_lines[${i}]`, `expected one line, found ${JSON.stringify(line)}`);
    const t = line.trim();
    return t.startsWith('#') ? t : `${DIRECTIVE_PREFIX[scheduler]} ${t}`;
  });
}

/**
 * Slurm (sbatch(1), Slurm 22.05.8, Debian slurm-client 22.05.8-4): --job-name, --nodes=1, --ntasks=1,
 * --cpus-per-task, --mem (MiB with the M suffix), --time (D-HH:MM:SS), --gres=gpu:N, --partition,
 * --account, --qos, --array=1-N%T, --no-requeue (ratchet resubmits itself: a requeued job would find
 * the first run's exit record and not run again).
 */
export function slurmDirectives(r: Resources, name: string, array?: ArrayRequest): string[] {
  checkCommon(r, name, array);
  const p = DIRECTIVE_PREFIX.slurm;
  const out = [`${p} --job-name=${name}`, `${p} --nodes=1`, `${p} --ntasks=1`, `${p} --cpus-per-task=${r.cpus}`];
  if (r.memory_mb !== undefined) out.push(`${p} --mem=${Math.ceil(r.memory_mb)}M`);
  out.push(`${p} --time=${slurmTime(r.walltime_s)}`);
  if (r.gpus > 0) out.push(`${p} --gres=gpu:${r.gpus}`);
  const partition = checkName('resources.partition', r.partition);
  if (partition) out.push(`${p} --partition=${partition}`);
  const account = checkName('resources.account', r.account);
  if (account) out.push(`${p} --account=${account}`);
  const qos = checkName('resources.qos', r.qos);
  if (qos) out.push(`${p} --qos=${qos}`);
  out.push(`${p} --no-requeue`);
  if (array) {
    out.push(`${p} --array=1-${array.count}${array.throttle ? `%${array.throttle}` : ''}`);
    out.push(`${p} --output=slurm-%A_%a.out`);
  } else {
    out.push(`${p} --output=slurm-%j.out`);
  }
  return [...out, ...extraLines('slurm', r.extra)];
}

/**
 * PBS Professional / OpenPBS (qsub(1B) and pbs_resources(7B), OpenPBS doc/man1/qsub.1B at commit
 * 1dd4c360): -N, -l select=1:ncpus=N:mem=Mmb[:ngpus=G], -l walltime=HH:MM:SS, -q queue, -A account,
 * -J 1-N%T (the %T sets max_run_subjobs), -j oe, -r n (not rerunnable: ratchet resubmits; job arrays
 * are always rerunnable whatever -r says), -S /bin/bash. PBS has no quality-of-service option.
 */
export function pbsDirectives(r: Resources, name: string, array?: ArrayRequest): string[] {
  checkCommon(r, name, array);
  if (r.qos !== undefined) throw new DirectiveError('resources.qos', 'PBS has no quality-of-service option: remove qos, or write the site\'s own directive in scheduler_lines');
  const p = DIRECTIVE_PREFIX.pbs;
  let select = `select=1:ncpus=${r.cpus}`;
  if (r.memory_mb !== undefined) select += `:mem=${Math.ceil(r.memory_mb)}mb`;
  if (r.gpus > 0) select += `:ngpus=${r.gpus}`;
  const out = [`${p} -N ${name}`, `${p} -S /bin/bash`, `${p} -l ${select}`, `${p} -l walltime=${hhmmss(r.walltime_s)}`];
  const queue = checkName('resources.partition', r.partition);
  if (queue) out.push(`${p} -q ${queue}`);
  const account = checkName('resources.account', r.account);
  if (account) out.push(`${p} -A ${account}`);
  out.push(`${p} -j oe`);
  if (array) out.push(`${p} -J 1-${array.count}${array.throttle ? `%${array.throttle}` : ''}`);
  else out.push(`${p} -r n`);
  return [...out, ...extraLines('pbs', r.extra)];
}

/**
 * IBM Spectrum LSF 10.1 (bsub(1)): -J name (arrays: -J "name[1-N]%T"), -n cpus with
 * -R "span[hosts=1]", -W [hour:]minute, -M memory limit and -R "rusage[mem=...]" with an explicit MB
 * unit (units accepted from LSF 10.1.0.2; without a unit LSF reads LSF_UNIT_FOR_LIMITS, KB by default),
 * -gpu "num=G", -q queue, -P project (the account), -o/-e output files (without -o LSF mails the output).
 * LSF has no quality-of-service option.
 */
export function lsfDirectives(r: Resources, name: string, array?: ArrayRequest): string[] {
  checkCommon(r, name, array);
  if (r.qos !== undefined) throw new DirectiveError('resources.qos', 'LSF has no quality-of-service option: remove qos, or write the site\'s own directive in scheduler_lines');
  const p = DIRECTIVE_PREFIX.lsf;
  const out: string[] = [];
  if (array) out.push(`${p} -J "${name}[1-${array.count}]${array.throttle ? `%${array.throttle}` : ''}"`);
  else out.push(`${p} -J ${name}`);
  out.push(`${p} -n ${r.cpus}`, `${p} -R "span[hosts=1]"`, `${p} -W ${ceilMinutes(r.walltime_s)}`);
  if (r.memory_mb !== undefined) {
    const mb = Math.ceil(r.memory_mb);
    out.push(`${p} -M ${mb}MB`, `${p} -R "rusage[mem=${mb}MB]"`);
  }
  if (r.gpus > 0) out.push(`${p} -gpu "num=${r.gpus}"`);
  const queue = checkName('resources.partition', r.partition);
  if (queue) out.push(`${p} -q ${queue}`);
  const account = checkName('resources.account', r.account);
  if (account) out.push(`${p} -P ${account}`);
  if (array) out.push(`${p} -o lsf-%J_%I.out`, `${p} -e lsf-%J_%I.out`);
  else out.push(`${p} -o lsf-%J.out`, `${p} -e lsf-%J.out`);
  return [...out, ...extraLines('lsf', r.extra)];
}

/**
 * Grid Engine (qsub(1) / sge_submit(1) and queue_conf(5), Son of Grid Engine 8.1.9, Debian
 * gridengine-client 8.1.9+dfsg-10): -N, -S /bin/bash, -cwd, -j y, -r n, -l h_rt=HH:MM:SS,
 * -l h_vmem=<per slot>M (h_vmem is per slot, so the task's memory is divided by its cpus),
 * -pe <pe> N for more than one cpu (the parallel environment's name is site-specific: "smp" unless the
 * extra directives already request a -pe), -q queue, -A account, -t 1-N and -tc T for arrays.
 * Grid Engine has no standard GPU request nor quality of service.
 */
export function sgeDirectives(r: Resources, name: string, array?: ArrayRequest, pe = 'smp'): string[] {
  checkCommon(r, name, array);
  if (r.qos !== undefined) throw new DirectiveError('resources.qos', 'Grid Engine has no quality-of-service option: remove qos, or write the site\'s own directive in scheduler_lines');
  if (r.gpus > 0) throw new DirectiveError('resources.gpus', 'Grid Engine has no standard GPU request: set gpus to 0 and write the site\'s own request in scheduler_lines (for example "-l gpu=1")');
  const p = DIRECTIVE_PREFIX.sge;
  const extra = extraLines('sge', r.extra);
  const out = [`${p} -N ${name}`, `${p} -S /bin/bash`, `${p} -cwd`, `${p} -j y`, `${p} -r n`, `${p} -l h_rt=${hhmmss(r.walltime_s)}`];
  if (r.memory_mb !== undefined) out.push(`${p} -l h_vmem=${Math.ceil(r.memory_mb / r.cpus)}M`);
  if (r.cpus > 1 && !extra.some((l) => /\s-pe\s/.test(`${l} `))) {
    if (!/^[A-Za-z0-9_.-]+$/.test(pe)) throw new DirectiveError('backend.sge_pe', `expected a parallel environment name, found ${JSON.stringify(pe)}`);
    out.push(`${p} -pe ${pe} ${r.cpus}`);
  }
  const queue = checkName('resources.partition', r.partition);
  if (queue) out.push(`${p} -q ${queue}`);
  const account = checkName('resources.account', r.account);
  if (account) out.push(`${p} -A ${account}`);
  if (array) {
    out.push(`${p} -t 1-${array.count}`);
    if (array.throttle) out.push(`${p} -tc ${array.throttle}`);
  }
  return [...out, ...extra];
}

export const DIRECTIVES: Record<SchedulerName, (r: Resources, name: string, array?: ArrayRequest) => string[]> = {
  slurm: slurmDirectives,
  pbs: pbsDirectives,
  lsf: lsfDirectives,
  sge: (r, name, array) => sgeDirectives(r, name, array),
};
