/**
 * Job arrays: many tasks of one stage submitted with one scheduler call.
 *
 * Tasks that share a parent folder and identical resources are grouped, in order, and split into
 * arrays of at most `maxArraySize` elements (the site's limit); a group of one task is submitted as a
 * single job. Element i (1-based) of an array finds its task through line i of the array's manifest,
 * and runs that task's own run.sh: the same common body, with the same quoted values, as a single job.
 *
 * Files, beside the task folders: <stage dir>/.arrays/<key>.tasks (the manifest: one task folder name
 * per line, relative to the stage dir) and <key>.sh (the array script). Both are written to a
 * temporary name and renamed, so a reader never sees half a manifest. The key is a hash of the task
 * folders and resources, so the same set of tasks always gets the same key and job name: a submission
 * that is made again after a crash can be recognised in the scheduler's queue by its name.
 */
import { createHash } from 'node:crypto';
import { mkdirSync, renameSync, writeFileSync } from 'node:fs';
import { basename, dirname, join } from 'node:path';
import type { Resources, TaskSpec } from './backend.js';
import { DIRECTIVES, type SchedulerName } from './directives.js';
import { sanitizeJobName, shellQuote } from './shell.js';
import { fillTemplate, type PlaceholderValues, type ScriptTemplates } from './templates.js';

export const ARRAYS_DIR = '.arrays';

/** One scheduler submission: a single task, or an array of tasks (element k+1 = tasks[k]). */
export interface SubmissionUnit {
  kind: 'single' | 'array';
  tasks: TaskSpec[];
  /** Stable hash of the unit's task folders and resources (10 hex digits). */
  key: string;
  /** The job name the scheduler shows (unique per unit, stable across runs). */
  name: string;
  /** Arrays: the stage folder holding the tasks (manifest lines are relative to it). */
  base?: string;
}

export interface PlanOptions {
  /** backend.max_array_size: largest array the site accepts. */
  maxArraySize: number;
  /** Smallest group submitted as an array (default 2: one task is a plain job). */
  minArraySize?: number;
}

function hash(text: string, n = 10): string {
  return createHash('sha256').update(text).digest('hex').slice(0, n);
}

function resourcesKey(r: Resources): string {
  return JSON.stringify([r.cpus, r.gpus, r.memory_mb ?? null, r.walltime_s, r.partition ?? null, r.account ?? null, r.qos ?? null, r.extra ?? []]);
}

/**
 * The job name of a single task: the sanitized task name plus a hash of its folder, so two campaigns
 * (or two copies of one) never share a name in the queue.
 */
export function singleJobName(task: TaskSpec): string {
  return `${sanitizeJobName(task.name, 52)}.${hash(task.dir, 8)}`;
}

/** The job name of an array: "<campaign>.r<round>.<stage>.a<key>". */
export function arrayJobName(first: TaskSpec, key: string): string {
  const prefix = first.name.endsWith(first.id) ? first.name.slice(0, first.name.length - first.id.length) : '';
  return `${sanitizeJobName(`${prefix}r${first.round}.${first.stage}`, 50)}.a${key}`;
}

/** Group tasks into submission units (order kept within each group). */
export function planUnits(tasks: TaskSpec[], o: PlanOptions): SubmissionUnit[] {
  if (!Number.isInteger(o.maxArraySize) || o.maxArraySize < 1) throw new Error(`backend.max_array_size: expected a whole number of at least 1, found ${o.maxArraySize}`);
  const minArray = Math.max(2, o.minArraySize ?? 2);
  const groups = new Map<string, TaskSpec[]>();
  for (const t of tasks) {
    const k = `${dirname(t.dir)}\0${resourcesKey(t.resources)}`;
    let g = groups.get(k);
    if (!g) groups.set(k, (g = []));
    g.push(t);
  }
  const units: SubmissionUnit[] = [];
  for (const g of groups.values()) {
    for (let i = 0; i < g.length; i += o.maxArraySize) {
      const chunk = g.slice(i, i + o.maxArraySize);
      if (chunk.length < minArray || o.maxArraySize < minArray) {
        for (const t of chunk) units.push({ kind: 'single', tasks: [t], key: hash(t.dir), name: singleJobName(t) });
      } else {
        const key = hash(JSON.stringify([chunk.map((t) => t.dir), resourcesKey(chunk[0].resources)]));
        units.push({ kind: 'array', tasks: chunk, key, name: arrayJobName(chunk[0], key), base: dirname(chunk[0].dir) });
      }
    }
  }
  return units;
}

/** Manifest text: line k = the folder name of element k, relative to the stage folder. */
export function manifestText(unit: SubmissionUnit): string {
  const base = unit.base ?? dirname(unit.tasks[0].dir);
  return unit.tasks
    .map((t) => {
      if (dirname(t.dir) !== base) throw new Error(`task ${t.id}: ${t.dir} is not in ${base}`);
      const name = basename(t.dir);
      if (/[\n\r\0]/.test(name) || name === '' || name === '.' || name === '..') throw new Error(`task ${t.id}: folder name ${JSON.stringify(name)} cannot be a manifest line`);
      return `${name}\n`;
    })
    .join('');
}

/** The index variable each scheduler sets in an array element. */
export const ARRAY_INDEX_VAR: Record<SchedulerName, string> = {
  slurm: 'SLURM_ARRAY_TASK_ID', // sbatch(1), Slurm 22.05: OUTPUT ENVIRONMENT VARIABLES
  pbs: 'PBS_ARRAY_INDEX', // qsub(1B), OpenPBS: ENVIRONMENT VARIABLES
  lsf: 'LSB_JOBINDEX', // IBM Spectrum LSF 10.1: environment variables set for job arrays
  sge: 'SGE_TASK_ID', // sge_submit(1), Son of Grid Engine 8.1.9: -t option
};

/**
 * The array script: the scheduler's header template (directives for the whole array), then a short
 * body that reads its own line of the manifest and runs that task's run.sh with exec (so signals
 * from the scheduler, e.g. at the walltime, reach the task's script and its exit record is written).
 */
export function arrayScript(scheduler: SchedulerName, unit: SubmissionUnit, templates: ScriptTemplates, throttle: number | undefined, manifestPath: string): string {
  const first = unit.tasks[0];
  const base = unit.base ?? dirname(first.dir);
  const directives = DIRECTIVES[scheduler](first.resources, unit.name, { count: unit.tasks.length, throttle });
  const values: PlaceholderValues = {
    directives: directives.join('\n'),
    job_name: unit.name,
    task_id: shellQuote(`${first.stage} array ${unit.key}`),
    task_dir: shellQuote(base),
    stage: shellQuote(first.stage),
    round: String(first.round),
    cpus: String(first.resources.cpus),
    exports: '',
    setup: '',
    command: "''",
  };
  const head = fillTemplate(templates.header, values);
  const v = ARRAY_INDEX_VAR[scheduler];
  const body = `# ratchet job array ${unit.key}: ${unit.tasks.length} tasks of ${first.stage} (round ${first.round}).
# Element i runs the task folder named on line i of the manifest, with that task's own run.sh.
set -u
ratchet_manifest=${shellQuote(manifestPath)}
ratchet_base=${shellQuote(base)}
ratchet_i=\${${v}:-}
case $ratchet_i in
  ''|*[!0-9]*) printf 'ratchet: %s is not set to an array index (found "%s")\\n' ${v} "$ratchet_i" >&2; exit 1 ;;
esac
mapfile -t -s "$((10#$ratchet_i - 1))" -n 1 ratchet_line <"$ratchet_manifest" || exit 1
ratchet_task=\${ratchet_line[0]:-}
if [ -z "$ratchet_task" ]; then
  printf 'ratchet: line %s of %s is missing\\n' "$ratchet_i" "$ratchet_manifest" >&2
  exit 1
fi
exec bash -- "$ratchet_base/$ratchet_task/run.sh"
`;
  return `${head}${head.endsWith('\n') ? '' : '\n'}${body}`;
}

function writeAtomic(path: string, text: string, mode?: number): void {
  const tmp = `${path}.${process.pid}.tmp`;
  writeFileSync(tmp, text, mode === undefined ? undefined : { mode });
  renameSync(tmp, path);
}

/** Write the manifest and the array script; returns their paths and the folder to submit from. */
export function writeArrayFiles(scheduler: SchedulerName, unit: SubmissionUnit, templates: ScriptTemplates, throttle: number | undefined): { dir: string; manifest: string; script: string } {
  if (unit.kind !== 'array') throw new Error('writeArrayFiles: not an array');
  const dir = join(unit.base ?? dirname(unit.tasks[0].dir), ARRAYS_DIR);
  mkdirSync(dir, { recursive: true });
  const manifest = join(dir, `${unit.key}.tasks`);
  const script = join(dir, `${unit.key}.sh`);
  writeAtomic(manifest, manifestText(unit));
  writeAtomic(script, arrayScript(scheduler, unit, templates, throttle, manifest), 0o755);
  return { dir, manifest, script };
}
