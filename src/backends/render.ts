/**
 * Rendering one task's batch script: the backend's header template, then the common body, with every
 * value quoted. Pure apart from loading the templates once.
 */
import { isAbsolute } from 'node:path';
import type { TaskSpec } from './backend.js';
import { isEnvName, sanitizeJobName, shellQuote, ShellValueError } from './shell.js';
import { fillTemplate, loadTemplates, type PlaceholderValues, type ScriptTemplates } from './templates.js';

export { shellQuote, sanitizeJobName, toEnvName, isEnvName, ShellValueError } from './shell.js';
export { loadTemplates, TemplateError, PLACEHOLDERS, BUILTIN_TEMPLATES_DIR, type ScriptTemplates } from './templates.js';

/** A task that cannot be rendered: names the task and the offending field. */
export class RenderError extends Error {
  readonly exitCode = 2;
  constructor(
    readonly task: string,
    readonly field: string,
    detail: string,
  ) {
    super(`task ${task}: ${field}: ${detail}`);
    this.name = 'RenderError';
  }
}

/**
 * The variables the script itself exports for every task (TaskSpec.env may add to them and, for the
 * same name, wins): RATCHET_TASK, RATCHET_TASK_DIR, RATCHET_TASK_JSON, RATCHET_ROUND, RATCHET_STAGE, RATCHET_CPUS.
 */
export function baseEnv(task: TaskSpec): Record<string, string> {
  const dir = task.dir.replace(/\/+$/, '') || '/';
  return {
    RATCHET_TASK: task.id,
    RATCHET_TASK_DIR: dir,
    RATCHET_TASK_JSON: `${dir === '/' ? '' : dir}/task.json`,
    RATCHET_ROUND: String(task.round),
    RATCHET_STAGE: task.stage,
    RATCHET_CPUS: String(task.resources.cpus),
  };
}

/**
 * The bash batch script for a task: `header` = the scheduler directive lines (none for local), placed
 * where the header template says {{directives}}. `templates` default to the built-in local ones.
 * Throws RenderError (exitCode 2) for a relative task dir, an empty command, a bad environment
 * variable name, a multi-line directive, a NUL byte in any value, or directives with no
 * {{directives}} placeholder in the templates to put them.
 */
export function renderScript(task: TaskSpec, header: string[], templates: ScriptTemplates = loadTemplates('local')): string {
  if (!isAbsolute(task.dir)) throw new RenderError(task.id, 'dir', `expected an absolute path, found ${JSON.stringify(task.dir)}`);
  if (task.command.trim() === '') throw new RenderError(task.id, 'command', 'expected a command line, found an empty one');
  if (!Number.isInteger(task.round) || task.round < 0) throw new RenderError(task.id, 'round', `expected a whole number >= 0, found ${task.round}`);
  for (const line of header) {
    if (/[\r\n\0]/.test(line)) throw new RenderError(task.id, 'directives', `a directive must be one line, found ${JSON.stringify(line)}`);
  }
  if (header.length > 0 && !templates.header.names.includes('directives') && !templates.body.names.includes('directives')) {
    throw new RenderError(task.id, 'directives', `the template ${templates.header.file} has no {{directives}} placeholder for the ${header.length} scheduler directive line(s)`);
  }
  const base = baseEnv(task);
  const env = { ...base, ...task.env };
  let exports = '';
  for (const [name, value] of Object.entries(env)) {
    if (!isEnvName(name)) throw new RenderError(task.id, `env.${name}`, 'expected a variable name of letters, digits and _ not starting with a digit');
    exports += `export ${name}=${quote(task.id, `env.${name}`, value)}\n`;
  }
  const setup = task.setup.map((line, i) => {
    if (line.includes('\0')) throw new RenderError(task.id, `setup[${i}]`, 'a set-up line contains a NUL byte');
    return line;
  });
  const values: PlaceholderValues = {
    directives: header.join('\n'),
    job_name: sanitizeJobName(task.name),
    task_id: quote(task.id, 'id', task.id),
    task_dir: quote(task.id, 'dir', base.RATCHET_TASK_DIR),
    stage: quote(task.id, 'stage', task.stage),
    round: String(task.round),
    cpus: quote(task.id, 'resources.cpus', String(task.resources.cpus)),
    exports: exports.slice(0, -1),
    setup: setup.join('\n'),
    command: quote(task.id, 'command', task.command),
  };
  const head = fillTemplate(templates.header, values);
  return `${head}${head.endsWith('\n') ? '' : '\n'}${fillTemplate(templates.body, values)}`;
}

function quote(task: string, field: string, value: string): string {
  try {
    return shellQuote(value);
  } catch (err) {
    if (err instanceof ShellValueError) throw new RenderError(task, field, err.message);
    throw err;
  }
}
