/**
 * Batch-script templates: plain text with {{name}} placeholders and no logic.
 *
 * A script is two templates: the backend's header (`templates/<backend>.sh`: the #! line and the
 * scheduler directives) followed by the body shared by every backend (`templates/common.sh`).
 * A campaign may name its own template folder; a file there replaces the built-in file of the same
 * name, and files it lacks fall back to the built-in ones.
 *
 * Syntax: `{{name}}` with name in [a-z_]; every `{{` in a template must open a known placeholder
 * (a typo is an error naming the file and line, not silent text). Values are filled in by
 * renderScript; see PLACEHOLDERS for what each one holds and where it may be used.
 */
import { existsSync, readFileSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';

/** The built-in templates folder (the package's templates/, from src/backends/ or dist/backends/). */
export const BUILTIN_TEMPLATES_DIR: string = fileURLToPath(new URL('../../templates/', import.meta.url));

/** The body every backend shares. */
export const COMMON_TEMPLATE = 'common.sh';

/**
 * What each placeholder expands to. "word" values are already quoted shell words on one line:
 * use them where a shell word goes (or in a comment), never inside quotes. "lines" values are whole lines.
 */
export const PLACEHOLDERS = {
  directives: 'lines: the scheduler header lines the backend computed (none for local)',
  job_name: 'word: the job name, sanitized to [A-Za-z0-9_.-] (safe anywhere, also in directives)',
  task_id: 'word: the task id, e.g. r0/label/0003, quoted',
  task_dir: 'word: the absolute task directory, quoted',
  stage: 'word: the stage name, quoted',
  round: 'word: the round number',
  cpus: 'word: the cpus requested',
  exports: 'lines: one `export NAME=value` line per environment variable, values quoted',
  setup: "lines: the stage's set-up lines from the campaign, as written (they are shell code by intent)",
  command: "word: the stage's command line, quoted: the body passes it to `bash -c` as data",
} as const;

export type PlaceholderName = keyof typeof PLACEHOLDERS;
export type PlaceholderValues = Record<PlaceholderName, string>;

const NAMES = new Set<string>(Object.keys(PLACEHOLDERS));

/** A template that cannot be used: names the file and the 1-based line. */
export class TemplateError extends Error {
  readonly exitCode = 2;
  constructor(
    readonly file: string,
    readonly line: number | undefined,
    detail: string,
  ) {
    super(line === undefined ? `${file}: ${detail}` : `${file}:${line}: ${detail}`);
    this.name = 'TemplateError';
  }
}

/** A parsed template: literal text and placeholder names alternate (parts[0], name[0], parts[1], ...). */
export interface CompiledTemplate {
  readonly file: string;
  readonly parts: readonly string[];
  readonly names: readonly PlaceholderName[];
}

/** Parse template text; unknown or malformed placeholders are errors naming file and line. */
export function compileTemplate(text: string, file: string): CompiledTemplate {
  const parts: string[] = [];
  const names: PlaceholderName[] = [];
  let from = 0;
  for (;;) {
    const open = text.indexOf('{{', from);
    if (open < 0) break;
    const close = text.indexOf('}}', open + 2);
    const name = close < 0 ? '' : text.slice(open + 2, close);
    const line = lineOf(text, open);
    if (!/^[a-z_]+$/.test(name)) {
      throw new TemplateError(file, line, `malformed placeholder starting "${text.slice(open, open + 20).split('\n')[0]}": expected {{name}} with name one of ${[...NAMES].join(', ')}`);
    }
    if (!NAMES.has(name)) {
      throw new TemplateError(file, line, `unknown placeholder {{${name}}}: expected one of ${[...NAMES].join(', ')}`);
    }
    parts.push(text.slice(from, open));
    names.push(name as PlaceholderName);
    from = close + 2;
  }
  parts.push(text.slice(from));
  return { file, parts, names };
}

function lineOf(text: string, index: number): number {
  let line = 1;
  for (let i = text.indexOf('\n'); i >= 0 && i < index; i = text.indexOf('\n', i + 1)) line++;
  return line;
}

/** Fill a compiled template. */
export function fillTemplate(t: CompiledTemplate, values: PlaceholderValues): string {
  let out = t.parts[0];
  for (let i = 0; i < t.names.length; i++) out += values[t.names[i]] + t.parts[i + 1];
  return out;
}

/** The header and body templates a backend renders with. */
export interface ScriptTemplates {
  backend: string;
  header: CompiledTemplate;
  body: CompiledTemplate;
}

const cache = new Map<string, ScriptTemplates>();

/**
 * Load (once per backend and folder) the templates for a backend: `<backend>.sh` and `common.sh`,
 * each from `overrideDir` when it holds that file, else from the built-in folder.
 * Checks: the header starts with a #! line, the body uses {{command}} and {{task_dir}}.
 */
export function loadTemplates(backend: string, overrideDir?: string): ScriptTemplates {
  const key = `${backend}\0${overrideDir ?? ''}`;
  const hit = cache.get(key);
  if (hit) return hit;
  if (overrideDir !== undefined) {
    let isDir = false;
    try {
      isDir = statSync(overrideDir).isDirectory();
    } catch {
      isDir = false;
    }
    if (!isDir) throw new TemplateError(overrideDir, undefined, 'the campaign\'s template folder does not exist or is not a folder');
  }
  const header = compileTemplate(...readTemplate(`${backend}.sh`, overrideDir));
  const body = compileTemplate(...readTemplate(COMMON_TEMPLATE, overrideDir));
  if (!header.parts[0].startsWith('#!')) {
    throw new TemplateError(header.file, 1, 'a header template must start with a #! line (e.g. #!/usr/bin/env bash)');
  }
  for (const required of ['command', 'task_dir'] as const) {
    if (!body.names.includes(required)) {
      throw new TemplateError(body.file, undefined, `the body template must use {{${required}}}`);
    }
  }
  const t: ScriptTemplates = { backend, header, body };
  cache.set(key, t);
  return t;
}

function readTemplate(name: string, overrideDir: string | undefined): [string, string] {
  const candidates = overrideDir === undefined ? [BUILTIN_TEMPLATES_DIR] : [overrideDir, BUILTIN_TEMPLATES_DIR];
  for (const dir of candidates) {
    const file = join(dir, name);
    if (existsSync(file)) {
      const bytes = readFileSync(file);
      let text: string;
      try {
        text = new TextDecoder('utf-8', { fatal: true }).decode(bytes);
      } catch {
        throw new TemplateError(file, undefined, 'expected a text template (UTF-8), found binary data');
      }
      const nul = text.indexOf('\0');
      if (nul >= 0) throw new TemplateError(file, lineOf(text, nul), 'expected a text template, found a NUL byte');
      return [text, file];
    }
  }
  throw new TemplateError(join(BUILTIN_TEMPLATES_DIR, name), undefined, `no template ${name} (is the backend name right?)`);
}

/** Forget loaded templates (for tests that rewrite a template folder). */
export function clearTemplateCache(): void {
  cache.clear();
}
