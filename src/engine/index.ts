/**
 * The campaign engine: rounds and stages, planning, running, collecting, judging, resuming.
 *
 *   const { exitCode } = await runCampaign({ campaign: 'campaign.yaml', jobs: 2, until: 'r1/train' });
 *   const { report } = await campaignStatus('campaign.yaml', console.error);  // formatStatus(report, new Output(process.stdout))
 *   await runCampaign({ campaign: 'campaign.yaml', retry: 'r0/label/0003' });
 */
export { runCampaign, describeOutcome, outcomeExitCode, type RunOptions, type RunResult } from './run.js';
export { advance, planStage, collectAndGate, type Outcome, type AdvanceOptions } from './advance.js';
export { campaignStatus, buildStatus, formatStatus, foldCampaign, type StatusReport, type RoundStatus, type StageStatus } from './status.js';
export { planRetry, applyRetry, markRetry, RetryError, type RetryPlan, type RetryMarks } from './retry.js';
export { reconcile, type ReconcileReport } from './reconcile.js';
export { collectStage } from './collect.js';
export { Engine, MemorySink, bringInputsInside, type EventSink } from './context.js';
export { taskJson, taskSpec, materialize, writeTasks, type TaskJson, type MaterialTask } from './plan.js';
export {
  applyEvent,
  foldEvents,
  emptyState,
  summarizeStage,
  frontier,
  taskPhase,
  countedFailures,
  RERUN_BY_ITSELF,
  type CampaignState,
  type StageRecord,
  type TaskRecord,
  type Attempt,
  type StagePhase,
  type TaskPhase,
  type StageSummary,
} from './state.js';
export { STAGES, parseTaskRef, parseUntil, untilPoint, taskId, stageId, taskName, type Stage, type Until, type Point, type TaskRef } from './ids.js';
export { samplePolicy, type SamplePolicy, type SampleRequest, type SampleOutcome, type SampleSource } from './sample-policy.js';
export { STAGE_DEFS } from './stages/index.js';
export type { StageDef, StagePlan, PlannedTask, StageContext, StageVerdict } from './stages/types.js';
export { campaignView, type CampaignView, type StageView, type ConditionView } from './view.js';
export { Output, BufferOutput, colorWanted } from './output.js';
export type * from './events.js';
