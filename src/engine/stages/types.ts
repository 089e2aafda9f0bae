/**
 * What a stage says about itself: its tasks (with inputs, parameters and expected outputs), what it
 * makes of its tasks' outputs once all succeeded, and its gate. One file per stage implements this.
 */
import type { CampaignView } from '../view.js';
import type { CampaignState } from '../state.js';
import type { GateRecord } from '../events.js';
import type { Stage } from '../ids.js';
import type { SamplePolicy } from '../sample-policy.js';

/** An input a task reads: an absolute path and, when registered, its artifact id. */
export interface TaskInput {
  path: string;
  artifact?: string;
}

/** An output a task must write, relative to its task directory, and the artifact role it gets. */
export interface TaskOutput {
  path: string;
  role: string;
}

export interface PlannedTask {
  /** "0003" or a condition name: the last part of the task id and the directory name. */
  name: string;
  seed: number;
  inputs: Record<string, TaskInput>;
  params: Record<string, unknown>;
  outputs: Record<string, TaskOutput>;
  /** Files the engine writes into the task directory before the task runs (relative path -> content). */
  files?: Record<string, string>;
  /** Runs inside ratchet instead of through the backend (the built-in sampling). */
  builtin?: boolean;
}

/** An artifact to register at planning (starting structures, label chunks); hashed unless given. */
export interface NewArtifact {
  /** Absolute path. */
  path: string;
  role: string;
  inputs: string[];
  task?: string;
  command?: string;
  /** Known content (the engine hashes it instead of reading the file back). */
  content?: string;
  /** Written by planning (not yet on disk when the plan is made). */
  written?: boolean;
}

export interface StagePlan {
  tasks: PlannedTask[];
  /** Artifact ids the stage reads (recorded with 'stage_planned'). */
  inputs: string[];
  /** Artifacts to register before the stage is recorded as planned. */
  artifacts: NewArtifact[];
  notes?: string[];
}

/** What the stage functions may use. */
export interface StageContext {
  view: CampaignView;
  state: CampaignState;
  round: number;
  /** Register an artifact unless the same content is already registered at that path; returns its id. */
  register(a: NewArtifact): Promise<string>;
  /** The id of a registered file (by absolute path), or undefined. */
  artifactId(absPath: string): string | undefined;
  samplePolicy: SamplePolicy;
  log(message: string): void;
}

export interface StageVerdict {
  verdict: 'pass' | 'warn' | 'fail';
  reasons: string[];
  gates: GateRecord[];
  figures?: Record<string, unknown>;
  /** One line for a passing stage (what `run` and `status` print), e.g. the bands per condition. */
  summary?: string;
}

export interface StageDef {
  stage: Stage;
  /** The tasks of this stage in this round, from the campaign and the upstream artifacts. */
  plan(ctx: StageContext): Promise<StagePlan>;
  /**
   * After every task succeeded and each task's outputs are registered: make the stage's own outputs
   * (e.g. merged files). Must be idempotent (a crash may repeat it).
   */
  collect?(ctx: StageContext): Promise<void>;
  /** Judge the stage's outputs. Must not change any file. */
  gate(ctx: StageContext): Promise<StageVerdict>;
}
