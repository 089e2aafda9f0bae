/**
 * The task contract for the demo's stage programs.
 *
 * A program finds its inputs, outputs and parameters, in this order of precedence:
 *   1. command-line flags (--in, --out, --<param-name> ...), for use by hand and in tests;
 *   2. environment variables set by the engine: RATCHET_IN_<NAME>, RATCHET_OUT_<NAME>, RATCHET_PARAM_<NAME>,
 *      RATCHET_SEED (the engine sets them to the same values as task.json);
 *   3. task.json (path from --task or RATCHET_TASK_JSON): { inputs: {name: absPath}, outputs: {name: path
 *      relative to the task directory}, params: {...}, seed };
 *   4. the program's defaults.
 * Parameters are snake_case in task.json (r_cut) and kebab-case as flags (--r-cut).
 * Bad input exits with code 2 and a message naming the file, key or flag and what was expected.
 */
import { mkdir, readFile } from 'node:fs/promises';
import { dirname, isAbsolute, resolve } from 'node:path';
import { parseArgs } from 'node:util';

export class UsageError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'UsageError';
  }
}

export type ParamType = 'number' | 'integer' | 'string' | 'boolean';

export interface ParamSpec {
  /** snake_case name as in task.json params. */
  name: string;
  type: ParamType;
  help: string;
  default?: number | string | boolean;
  /** Allowed values for strings. */
  choices?: string[];
  /** Repeatable flag (strings only); collected as an array. */
  multiple?: boolean;
  /** Other names accepted as flags and task.json params keys. */
  aliases?: string[];
}

export interface IoSpec {
  /** Canonical name (task.json key; env var RATCHET_IN_<NAME> / RATCHET_OUT_<NAME>). */
  name: string;
  /** Other task.json names accepted for the same input. */
  aliases?: string[];
  /** Flag used by hand (default --in for the first input, --out for the first output). */
  flag: string;
  help: string;
  /** Inputs: more than one path allowed (repeatable flag; several task.json inputs). */
  multiple?: boolean;
  /** Match task.json inputs whose name matches this pattern too (e.g. model_0, model_1). */
  pattern?: RegExp;
  required?: boolean;
}

export interface ProgramSpec {
  name: string;
  summary: string;
  inputs: IoSpec[];
  outputs: IoSpec[];
  params: ParamSpec[];
}

export interface TaskFile {
  campaign?: unknown;
  round?: unknown;
  stage?: unknown;
  task?: unknown;
  seed?: unknown;
  inputs?: Record<string, unknown>;
  outputs?: Record<string, unknown>;
  params?: Record<string, unknown>;
  /** The engine's artifact ids of the inputs ("sha256:<hex>"), by input name. */
  input_artifacts?: Record<string, unknown>;
}

export interface Resolved {
  /** Input paths by canonical name (empty array when absent and optional). */
  inputs: Record<string, string[]>;
  /** Output paths by canonical name (undefined when absent and optional). */
  outputs: Record<string, string | undefined>;
  params: Record<string, number | string | boolean | string[] | undefined>;
  seed: number;
  /** Artifact ids of the inputs by name, when task.json gives them (input_artifacts). */
  inputArtifacts: Record<string, string>;
  /** The task id (RATCHET_TASK or task.json task), when run by the engine. */
  task?: string;
  taskDir?: string;
  taskJson?: string;
}

const flagName = (param: string): string => param.replace(/_/g, '-');
const envName = (name: string): string => name.toUpperCase().replace(/[^A-Z0-9]/g, '_');

export function usage(spec: ProgramSpec): string {
  const lines = [`${spec.name}: ${spec.summary}`, '', 'Inputs and outputs (flag | env | task.json key):'];
  for (const io of spec.inputs) lines.push(`  --${io.flag} FILE${io.multiple ? ' (repeatable)' : ''} | RATCHET_IN_${envName(io.name)} | inputs.${io.name}${io.aliases?.length ? ` (or ${io.aliases.join(', ')})` : ''}: ${io.help}`);
  for (const io of spec.outputs) lines.push(`  --${io.flag} FILE | RATCHET_OUT_${envName(io.name)} | outputs.${io.name}: ${io.help}`);
  lines.push('', 'Parameters (flag | task.json params key):');
  for (const p of spec.params) {
    const def = p.default === undefined ? '' : ` (default ${String(p.default)})`;
    const ch = p.choices ? ` [${p.choices.join('|')}]` : '';
    const aka = p.aliases?.length ? ` (or ${p.aliases.join(', ')})` : '';
    lines.push(`  --${flagName(p.name)}${p.type === 'boolean' ? '' : ' VALUE'}${ch} | params.${p.name}${aka}: ${p.help}${def}`);
  }
  lines.push('', 'Common: --task task.json (or RATCHET_TASK_JSON), --seed N (or RATCHET_SEED, task.json seed), --help');
  return lines.join('\n');
}

function coerce(p: ParamSpec, value: unknown, where: string): number | string | boolean {
  switch (p.type) {
    case 'number':
    case 'integer': {
      const v = typeof value === 'string' && value.trim() !== '' ? Number(value) : value;
      if (typeof v !== 'number' || !Number.isFinite(v)) throw new UsageError(`${where}: expected a number, found ${JSON.stringify(value)}`);
      if (p.type === 'integer' && !Number.isInteger(v)) throw new UsageError(`${where}: expected an integer, found ${JSON.stringify(value)}`);
      return v;
    }
    case 'boolean': {
      if (typeof value === 'boolean') return value;
      if (value === 'true' || value === '1') return true;
      if (value === 'false' || value === '0') return false;
      throw new UsageError(`${where}: expected true or false, found ${JSON.stringify(value)}`);
    }
    case 'string': {
      if (typeof value !== 'string' && typeof value !== 'number') throw new UsageError(`${where}: expected a string, found ${JSON.stringify(value)}`);
      const s = String(value);
      if (p.choices && !p.choices.includes(s)) throw new UsageError(`${where}: expected one of ${p.choices.join(', ')}, found ${JSON.stringify(value)}`);
      return s;
    }
  }
}

/** Parses flags, environment and task.json for a program; throws UsageError on bad input. */
export async function resolveTask(spec: ProgramSpec, argv: string[], env: NodeJS.ProcessEnv): Promise<Resolved | 'help'> {
  const options: Record<string, { type: 'string' | 'boolean'; multiple?: boolean }> = {
    task: { type: 'string' },
    seed: { type: 'string' },
    help: { type: 'boolean' },
  };
  for (const io of [...spec.inputs, ...spec.outputs]) options[io.flag] = { type: 'string', multiple: io.multiple === true };
  for (const p of spec.params) {
    for (const name of [p.name, ...(p.aliases ?? [])]) {
      const f = flagName(name);
      options[f] = { type: p.type === 'boolean' ? 'boolean' : 'string', multiple: p.multiple === true };
      if (p.type === 'boolean') options[`no-${f}`] = { type: 'boolean' };
    }
  }
  let values: Record<string, unknown>;
  try {
    ({ values } = parseArgs({ args: argv, options, allowPositionals: false, strict: true }));
  } catch (e) {
    throw new UsageError(`${spec.name}: ${(e as Error).message} (see --help)`);
  }
  if (values.help) return 'help';

  const taskJson = (values.task as string | undefined) ?? env.RATCHET_TASK_JSON;
  let task: TaskFile = {};
  let taskDir = env.RATCHET_TASK_DIR;
  if (taskJson) {
    let text: string;
    try {
      text = await readFile(taskJson, 'utf8');
    } catch (e) {
      throw new UsageError(`${taskJson}: cannot read task file (${(e as NodeJS.ErrnoException).code ?? (e as Error).message})`);
    }
    try {
      task = JSON.parse(text) as TaskFile;
    } catch (e) {
      throw new UsageError(`${taskJson}: expected JSON: ${(e as Error).message}`);
    }
    if (typeof task !== 'object' || task === null || Array.isArray(task)) throw new UsageError(`${taskJson}: expected a JSON object`);
    for (const key of ['inputs', 'outputs', 'params'] as const) {
      const v = task[key];
      if (v !== undefined && (typeof v !== 'object' || v === null || Array.isArray(v))) throw new UsageError(`${taskJson}: key ${key}: expected an object`);
    }
    taskDir = taskDir ?? dirname(resolve(taskJson));
  }
  const base = taskDir ?? process.cwd();
  // The engine sets RATCHET_IN_<NAME> / RATCHET_OUT_<NAME> for the same entries as task.json; either will do.
  const fromEnv = (prefix: string): Record<string, string> =>
    Object.fromEntries(
      Object.entries(env)
        .filter(([k, v]) => k.startsWith(prefix) && k.length > prefix.length && typeof v === 'string' && v !== '')
        .map(([k, v]) => [k.slice(prefix.length).toLowerCase(), v as string]),
    );
  const taskInputs: Record<string, unknown> = { ...(task.inputs ?? {}), ...fromEnv('RATCHET_IN_') };
  const claimed = new Set<string>();

  const inputs: Record<string, string[]> = {};
  for (const io of spec.inputs) {
    const flag = values[io.flag] as string[] | string | undefined;
    let paths: string[] = [];
    if (flag !== undefined) paths = (Array.isArray(flag) ? flag : [flag]).map((p) => resolve(p));
    else {
      const names = Object.keys(taskInputs).filter(
        (k) => !claimed.has(k) && (k === io.name || io.aliases?.includes(k) || io.pattern?.test(k)),
      );
      names.sort((a, b) => a.localeCompare(b, 'en', { numeric: true }));
      for (const k of names) {
        const v = taskInputs[k];
        const list = Array.isArray(v) ? v : [v];
        for (const item of list) {
          if (typeof item !== 'string' || item === '') throw new UsageError(`${taskJson}: key inputs.${k}: expected a path string, found ${JSON.stringify(item)}`);
          paths.push(resolve(base, item));
        }
        claimed.add(k);
      }
    }
    if (!io.multiple && paths.length > 1) throw new UsageError(`${spec.name}: input ${io.name}: expected one path, found ${paths.length}`);
    if (io.required !== false && paths.length === 0) {
      const found = Object.keys(taskInputs);
      throw new UsageError(
        `${spec.name}: missing input '${io.name}': give --${io.flag} FILE, RATCHET_IN_${envName(io.name)}, or task.json inputs.${io.name}` +
          (taskJson ? ` (${taskJson} has inputs: ${found.length ? found.join(', ') : 'none'})` : ''),
      );
    }
    inputs[io.name] = paths;
  }

  const taskOutputs: Record<string, unknown> = { ...(task.outputs ?? {}), ...fromEnv('RATCHET_OUT_') };
  const outputs: Record<string, string | undefined> = {};
  for (const io of spec.outputs) {
    const flag = values[io.flag] as string | undefined;
    const fromTask = taskOutputs[io.name] ?? io.aliases?.map((a) => taskOutputs[a]).find((v) => v !== undefined);
    let path: string | undefined;
    if (flag !== undefined) path = resolve(flag);
    else if (fromTask !== undefined) {
      if (typeof fromTask !== 'string' || fromTask === '') throw new UsageError(`${taskJson}: key outputs.${io.name}: expected a path string, found ${JSON.stringify(fromTask)}`);
      path = isAbsolute(fromTask) ? fromTask : resolve(base, fromTask);
    }
    if (io.required !== false && path === undefined) {
      throw new UsageError(`${spec.name}: missing output '${io.name}': give --${io.flag} FILE, RATCHET_OUT_${envName(io.name)}, or task.json outputs.${io.name}`);
    }
    outputs[io.name] = path;
  }

  const taskParams: Record<string, unknown> = { ...(task.params ?? {}), ...fromEnv('RATCHET_PARAM_') };
  const params: Resolved['params'] = {};
  for (const p of spec.params) {
    const names = [p.name, ...(p.aliases ?? [])];
    const f = names.map(flagName).find((n) => values[n] !== undefined || values[`no-${n}`] !== undefined) ?? flagName(p.name);
    const flag = values[f];
    const key = names.find((n) => taskParams[n] !== undefined && taskParams[n] !== null);
    if (p.type === 'boolean' && values[`no-${f}`]) params[p.name] = false;
    else if (flag !== undefined) {
      params[p.name] = p.multiple ? (flag as string[]).map((v) => String(coerce(p, v, `--${f}`))) : coerce(p, flag, `--${f}`);
    } else if (key !== undefined) {
      const v = taskParams[key];
      const where = task.params?.[key] === v ? `${taskJson}: key params.${key}` : `RATCHET_PARAM_${envName(key)}`;
      params[p.name] = p.multiple && Array.isArray(v) ? v.map((x, i) => String(coerce(p, x, `${where}[${i}]`))) : coerce(p, v, where);
    } else params[p.name] = p.default;
  }

  let seed = 0;
  const rawSeed = (values.seed as string | undefined) ?? env.RATCHET_SEED ?? task.seed;
  if (rawSeed !== undefined && rawSeed !== null && rawSeed !== '') {
    const s = typeof rawSeed === 'number' ? rawSeed : Number(rawSeed);
    const where = values.seed !== undefined ? '--seed' : env.RATCHET_SEED !== undefined ? 'RATCHET_SEED' : `${taskJson}: key seed`;
    if (!Number.isSafeInteger(s)) throw new UsageError(`${where}: expected an integer seed, found ${JSON.stringify(rawSeed)}`);
    seed = s;
  }
  const taskId = env.RATCHET_TASK ?? (typeof task.task === 'string' ? task.task : undefined);
  const inputArtifacts: Record<string, string> = {};
  const ia = task.input_artifacts;
  if (ia && typeof ia === 'object' && !Array.isArray(ia)) for (const [k, v] of Object.entries(ia)) if (typeof v === 'string') inputArtifacts[k] = v;
  return { inputs, outputs, params, seed, inputArtifacts, task: taskId, taskDir, taskJson: taskJson ? resolve(taskJson) : undefined };
}

/** Common error names that mean bad input (exit 2). */
const BAD_INPUT = new Set(['UsageError', 'ModelError', 'XyzError', 'CellError', 'ElementError', 'RangeError', 'FrameDataError']);

/**
 * Runs a program's main function with the contract's exit codes: 0 ok, 2 bad input (with a one-line
 * message on stderr), 1 anything else (with the stack).
 */
export async function runProgram(spec: ProgramSpec, main: (r: Resolved) => Promise<void>): Promise<void> {
  try {
    const r = await resolveTask(spec, process.argv.slice(2), process.env);
    if (r === 'help') {
      process.stdout.write(usage(spec) + '\n');
      return;
    }
    for (const out of Object.values(r.outputs)) if (out) await mkdir(dirname(out), { recursive: true });
    await main(r);
  } catch (e) {
    const err = e as Error;
    if (BAD_INPUT.has(err?.name)) {
      process.stderr.write(`${spec.name}: error: ${err.message}\n`);
      process.exitCode = 2;
    } else {
      process.stderr.write(`${spec.name}: failed: ${err?.stack ?? String(e)}\n`);
      process.exitCode = 1;
    }
  }
}

/** Numeric parameter accessor (after resolveTask, numbers with defaults are always present). */
export function num(r: Resolved, name: string): number {
  const v = r.params[name];
  if (typeof v !== 'number') throw new UsageError(`parameter ${name}: expected a number, found ${JSON.stringify(v)}`);
  return v;
}

export function optNum(r: Resolved, name: string): number | undefined {
  const v = r.params[name];
  return typeof v === 'number' ? v : undefined;
}

export function str(r: Resolved, name: string): string {
  const v = r.params[name];
  if (typeof v !== 'string') throw new UsageError(`parameter ${name}: expected a string, found ${JSON.stringify(v)}`);
  return v;
}

export function bool(r: Resolved, name: string): boolean {
  return r.params[name] === true;
}
