/**
 * Where a validate constant-energy run of a pressure condition starts. A pressure condition explores other
 * volumes than its start structure's cell, so its constant-energy (fixed-cell) validation must start from a cell
 * the condition actually reached:
 * - round k > 0: the last kept frame of round k-1's simulate trajectory of that condition (trajectory.kept.xyz
 *   when the run was cut at a contact, else trajectory.xyz), written into the validate task directory as
 *   start.xyz and registered as an artifact made from that trajectory (role `nve_start`), so lineage shows it;
 * - round 0 (or no earlier run of the condition): the condition's start structure, with `pressure` in the task
 *   params so the program can bring the cell to that pressure first.
 * A condition without pressure always starts from its start structure.
 */
import { createHash } from 'node:crypto';
import { join } from 'node:path';
import type { Frame } from '../../atoms/frame.js';
import { readFrames } from '../../atoms/xyz/reader.js';
import { formatFrame } from '../../atoms/xyz/writer.js';
import { artifactId } from '../../ledger/artifacts.js';
import { taskId } from '../ids.js';
import { stageRecord } from '../state.js';
import type { ConditionView } from '../view.js';
import { taskDir } from './common.js';
import { TRAJECTORY_KEPT, TRAJECTORY_OUTPUT } from './simulate.js';
import type { NewArtifact, StageContext, TaskInput } from './types.js';

export const NVE_START = 'start.xyz';

export interface NveStart {
  input: TaskInput;
  /** Files the engine writes into the task directory (start.xyz), and the artifacts to register. */
  files: Record<string, string>;
  artifacts: NewArtifact[];
  /** Pressure for the params (bar): present when the program must bring the cell to it itself. */
  pressure?: number;
}

/** The start of the constant-energy run `name` (nve-<condition>) of this round. */
export async function nveStart(ctx: StageContext, cond: ConditionView, name: string): Promise<NveStart> {
  const fromStart: NveStart = {
    input: { path: cond.start, artifact: ctx.artifactId(cond.start) },
    files: {},
    artifacts: [],
    ...(cond.pressure !== undefined ? { pressure: cond.pressure } : {}),
  };
  if (cond.pressure === undefined || ctx.round === 0) return fromStart;
  const prev = ctx.round - 1;
  if (!stageRecord(ctx.state, prev, 'simulate')?.tasks.some((t) => t.name === cond.name)) return fromStart;
  const dir = taskDir(ctx, prev, 'simulate', cond.name);
  const kept = join(dir, TRAJECTORY_KEPT);
  const raw = join(dir, TRAJECTORY_OUTPUT);
  const source = ctx.artifactId(kept) ? kept : ctx.artifactId(raw) ? raw : undefined;
  if (!source) return fromStart;
  let last: Frame | undefined;
  let index = -1;
  for await (const f of readFrames(source)) {
    last = f;
    index++;
  }
  if (!last) return fromStart;
  const content = formatFrame(last);
  const path = join(taskDir(ctx, ctx.round, 'validate', name), NVE_START);
  const id = artifactId(createHash('sha256').update(content).digest('hex'));
  const file = source === kept ? TRAJECTORY_KEPT : TRAJECTORY_OUTPUT;
  return {
    input: { path, artifact: id },
    files: { [NVE_START]: content },
    artifacts: [
      {
        path,
        role: 'nve_start',
        inputs: [ctx.artifactId(source) as string],
        command: `ratchet validate plan: last frame (frame ${index}) of ${taskId(prev, 'simulate', cond.name)}/${file}`,
        content,
        written: true,
      },
    ],
  };
}
