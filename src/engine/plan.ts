/**
 * From a stage's plan to task directories: task.json (inputs, parameters, expected outputs), the batch
 * script rendered by the backend (run.sh), and any input files the engine makes (label chunks).
 * task.json is the record of the plan; the script is rendered again from task.json and the current
 * campaign before every attempt, so a fixed command or resource takes effect on `ratchet retry`.
 */
import { existsSync, mkdirSync, writeFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import type { Backend, TaskSpec } from '../backends/backend.js';
import { toEnvName } from '../backends/shell.js';
import { SCRIPT_FILE, TASK_FILE, TaskFinishedError } from '../backends/task-files.js';
import { EXIT_RECORD_FILE } from '../backends/exit-record.js';
import { taskId, type Stage } from './ids.js';
import { abs, taskDirRel } from './layout.js';
import type { PlannedTask, StagePlan } from './stages/types.js';
import type { CampaignView } from './view.js';

/** The task.json every task directory holds (contract: see the brief's engine-side contracts). */
export interface TaskJson {
  campaign: string;
  round: number;
  stage: Stage;
  /** "r0/label/0003". */
  task: string;
  seed: number;
  /** Input name -> absolute path. */
  inputs: Record<string, string>;
  params: Record<string, unknown>;
  /** Output name -> path relative to the task directory. */
  outputs: Record<string, string>;
  /** Input name -> artifact id, for inputs that are registered artifacts. */
  input_artifacts: Record<string, string>;
  /** Output name -> the artifact role it is registered with. */
  output_roles: Record<string, string>;
  /** True when ratchet runs the task itself (the built-in sampling). */
  builtin?: boolean;
}

export function taskJson(view: CampaignView, round: number, stage: Stage, t: PlannedTask): TaskJson {
  const inputs: Record<string, string> = {};
  const inputArtifacts: Record<string, string> = {};
  for (const [name, i] of Object.entries(t.inputs)) {
    inputs[name] = i.path;
    if (i.artifact) inputArtifacts[name] = i.artifact;
  }
  const outputs: Record<string, string> = {};
  const roles: Record<string, string> = {};
  for (const [name, o] of Object.entries(t.outputs)) {
    outputs[name] = o.path;
    roles[name] = o.role;
  }
  const json: TaskJson = {
    campaign: view.name,
    round,
    stage,
    task: taskId(round, stage, t.name),
    seed: t.seed,
    inputs,
    params: t.params,
    outputs,
    input_artifacts: inputArtifacts,
    output_roles: roles,
  };
  if (t.builtin) json.builtin = true;
  return json;
}

/**
 * The backend's view of a task: the stage's command, set-up lines and resources from the campaign,
 * and the environment the command sees:
 *   RATCHET_TASK, RATCHET_TASK_DIR, RATCHET_TASK_JSON, RATCHET_ROUND, RATCHET_STAGE, RATCHET_CPUS (the script's own),
 *   RATCHET_SEED, RATCHET_CAMPAIGN (name), RATCHET_CAMPAIGN_DIR,
 *   RATCHET_IN_<NAME> (absolute path of each input), RATCHET_OUT_<NAME> (absolute path of each expected output),
 *   RATCHET_PARAM_<NAME> for each parameter that is a string, number or boolean.
 */
export function taskSpec(view: CampaignView, json: TaskJson, dir: string): TaskSpec {
  const st = view.stages[json.stage];
  const env: Record<string, string> = {
    RATCHET_SEED: String(json.seed),
    RATCHET_CAMPAIGN: view.name,
    RATCHET_CAMPAIGN_DIR: view.dir,
  };
  for (const [name, v] of Object.entries(json.params)) {
    if (typeof v === 'string' || typeof v === 'number' || typeof v === 'boolean') env[`RATCHET_PARAM_${toEnvName(name)}`] = String(v);
  }
  for (const [name, p] of Object.entries(json.inputs)) env[`RATCHET_IN_${toEnvName(name)}`] = p;
  for (const [name, p] of Object.entries(json.outputs)) env[`RATCHET_OUT_${toEnvName(name)}`] = join(dir, p);
  return {
    id: json.task,
    round: json.round,
    stage: json.stage,
    dir,
    command: st.command ?? '',
    setup: st.setup,
    env,
    resources: st.resources,
    name: `${view.name}.${json.task}`,
  };
}

export interface MaterialTask {
  name: string;
  id: string;
  /** Absolute task directory (where it will run). */
  dir: string;
  json: TaskJson;
  /** The rendered script, undefined for a built-in task. */
  script?: string;
  files: Record<string, string>;
}

/** Render every task of a stage plan (pure apart from the backend's template loading). */
export function materialize(view: CampaignView, round: number, stage: Stage, plan: StagePlan, backend: Backend): MaterialTask[] {
  return plan.tasks.map((t) => {
    const dir = abs(view.dir, taskDirRel(round, stage, t.name));
    const json = taskJson(view, round, stage, t);
    const script = t.builtin ? undefined : backend.render(taskSpec(view, json, dir));
    return { name: t.name, id: json.task, dir, json, script, files: t.files ?? {} };
  });
}

/**
 * Write rendered tasks under `root` (the campaign dir, or a dry run's plan folder): for each task its
 * directory, engine-made input files, task.json and run.sh. Synchronous, plain writes (no temporary
 * files, no syncs): planning thousands of tasks is dominated by system calls, and until the
 * 'stage_planned' event is written a crash only means the stage is planned again from scratch
 * (before each attempt the script and task.json are written again atomically by the backend's
 * writeTaskFiles). A task directory that already holds an exit record is refused, as writeTaskFiles does.
 */
export function writeTasks(view: CampaignView, tasks: MaterialTask[], root: string = view.dir): void {
  const parents = new Set<string>();
  for (const t of tasks) {
    const dir = root === view.dir ? t.dir : join(root, t.dir.slice(view.dir.length));
    const parent = dirname(dir);
    if (!parents.has(parent)) {
      mkdirSync(parent, { recursive: true });
      parents.add(parent);
    }
    try {
      mkdirSync(dir);
    } catch (err) {
      if ((err as NodeJS.ErrnoException).code !== 'EEXIST') throw err;
      if (existsSync(join(dir, EXIT_RECORD_FILE))) throw new TaskFinishedError(dir);
    }
    for (const [rel, content] of Object.entries(t.files)) {
      const p = join(dir, rel);
      if (rel.includes('/')) mkdirSync(dirname(p), { recursive: true });
      writeFileSync(p, content);
    }
    writeFileSync(join(dir, TASK_FILE), `${JSON.stringify(t.json, null, 2)}\n`);
    if (t.script !== undefined) writeFileSync(join(dir, SCRIPT_FILE), t.script, { mode: 0o755 });
  }
}
