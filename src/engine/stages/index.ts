/** The five stages, by name. */
import type { Stage } from '../ids.js';
import { label } from './label.js';
import { sample } from './sample.js';
import { simulate } from './simulate.js';
import { train } from './train.js';
import { validate } from './validate.js';
import type { StageDef } from './types.js';

export const STAGE_DEFS: Record<Stage, StageDef> = { sample, label, train, validate, simulate };

export type { StageDef, StagePlan, PlannedTask, StageContext, StageVerdict, NewArtifact, TaskInput, TaskOutput } from './types.js';
