/**
 * What the engine needs from a campaign, in one flat, normalised shape. `campaignView` turns the
 * loaded campaign (src/campaign/) into it; the engine's core reads this view only. Stage modules
 * read their own gate settings from `campaign` (the parsed file, defaults filled in).
 */
import { isAbsolute, resolve } from 'node:path';
import type { Resources } from '../backends/backend.js';
import type { Campaign } from '../campaign/schema.js';
import { conditionStartPath, startPaths, type LoadedCampaign } from '../campaign/load.js';
import { STAGES, type Stage } from './ids.js';

export interface StageView {
  /** The user's command, run with bash in the task directory; undefined = built in (sample only). */
  command?: string;
  /** Environment set-up lines run before the command. */
  setup: string[];
  resources: Resources;
  /** Extra parameters copied into each task's task.json (and RATCHET_PARAM_<NAME> for scalars). */
  params: Record<string, string | number | boolean>;
  /** Runs a task may have in all (the first included) before its failure blocks the stage. */
  attempts: number;
}

export interface ConditionView {
  name: string;
  /** Absolute path of the condition's starting structure. */
  start: string;
  temperature: number;
  pressure?: number;
  steps: number;
  timestep: number;
  write_every: number;
  seed: number;
}

export interface CampaignView {
  name: string;
  /** Absolute path of the campaign directory. */
  dir: string;
  /** Absolute path of the campaign file. */
  file: string;
  /** sha256 of the campaign file (hex). */
  sha256: string;
  /** M: models in the committee (train tasks). */
  committee: number;
  /** Base seed of the committee; task seeds derive from it and the task id. */
  seed: number;
  /** Rounds 0 .. maxRounds - 1 may run. */
  maxRounds: number;
  /** Confident fraction every condition must reach to converge. */
  target: number;
  /** Absolute paths of the starting structures (extended XYZ). */
  start: string[];
  conditions: ConditionView[];
  /** Frames per label task. */
  framesPerTask: number;
  stages: Record<Stage, StageView>;
  backend: { kind: string; jobs?: number; templateDir?: string };
  /** The parsed campaign file (defaults filled in), for stage-specific settings. */
  campaign: Campaign;
}

export function campaignView(loaded: LoadedCampaign): CampaignView {
  const c = loaded.campaign;
  const dir = resolve(loaded.dir);
  const at = (p: string): string => (isAbsolute(p) ? p : resolve(dir, p));
  const start = startPaths(c, dir);
  const stages = {} as Record<Stage, StageView>;
  for (const s of STAGES) {
    const st = c.stages[s];
    const r = st.resources;
    stages[s] = {
      command: st.command,
      setup: st.setup,
      resources: {
        cpus: r.cpus,
        gpus: r.gpus,
        memory_mb: r.memory,
        walltime_s: r.walltime,
        partition: r.partition,
        account: r.account,
        qos: r.qos,
        extra: r.scheduler_lines,
      },
      params: st.params,
      attempts: st.attempts,
    };
  }
  return {
    name: c.name,
    dir,
    file: loaded.file,
    sha256: loaded.sha256,
    committee: c.committee.size,
    seed: c.committee.seed,
    maxRounds: c.rounds.max,
    target: c.rounds.converge.confident_fraction,
    start,
    conditions: c.conditions.map((k) => ({
      name: k.name,
      start: conditionStartPath(c, dir, k),
      temperature: k.temperature,
      pressure: k.pressure,
      steps: k.steps,
      timestep: k.timestep,
      write_every: k.write_every,
      seed: k.seed,
    })),
    framesPerTask: c.stages.label.frames_per_task,
    stages,
    backend: {
      kind: c.backend.kind,
      jobs: c.backend.jobs,
      templateDir: c.backend.template_dir === undefined ? undefined : at(c.backend.template_dir),
    },
    campaign: c,
  };
}
