/**
 * Trajectories held to what their task asked: the `trajectory` gate (src/gates/trajectory.ts) on a simulate
 * run or a validate constant-energy run, with the steps, write interval, time step, temperature and pressure
 * read from the task's own task.json (what the program was actually given; a round that explores unvalidated
 * runs shorter), falling back to the condition's values.
 */
import { join } from 'node:path';
import { TASK_FILE } from '../../backends/task-files.js';
import { checkTrajectory } from '../../gates/trajectory.js';
import type { GateRecord } from '../events.js';
import { readJsonMaybe } from '../fsutil.js';
import type { ConditionView } from '../view.js';
import { runGate } from './common.js';

/** One run to judge: its task id, its task directory and trajectory path. */
export interface HeldRun {
  task: string;
  dir: string;
  path: string;
}

/** The numbers a run was asked for. */
export interface Asked {
  steps: number;
  writeEvery: number;
  timestep: number;
  temperature?: number;
  pressure?: number;
}

const numberOr = (v: unknown, d: number): number => (typeof v === 'number' && Number.isFinite(v) ? v : d);

/** What the task was given (task.json params), else the fallback. */
export async function askedOf(dir: string, fallback: Asked): Promise<Asked> {
  const tj = await readJsonMaybe<{ params?: Record<string, unknown> }>(join(dir, TASK_FILE));
  const p = tj?.params ?? {};
  const out: Asked = {
    steps: numberOr(p.steps, fallback.steps),
    writeEvery: numberOr(p.write_every, fallback.writeEvery),
    timestep: numberOr(p.timestep, fallback.timestep),
  };
  if (fallback.temperature !== undefined) out.temperature = numberOr(p.temperature, fallback.temperature);
  if (fallback.pressure !== undefined) out.pressure = numberOr(p.pressure, fallback.pressure);
  return out;
}

/**
 * The trajectory gate on a simulate run: length against the steps asked (excused at or after `cutAt`, the
 * contact cut), mean temperature against the condition's, mean pressure for a pressure condition.
 */
export async function simulateHeld(run: HeldRun, cond: ConditionView, cutAt: number | null): Promise<GateRecord> {
  return runGate('trajectory', run.task, async () => {
    const a = await askedOf(run.dir, {
      steps: cond.steps,
      writeEvery: cond.write_every,
      timestep: cond.timestep,
      temperature: cond.temperature,
      ...(cond.pressure !== undefined ? { pressure: cond.pressure } : {}),
    });
    return checkTrajectory([run.path], { ...a, cutAt, what: `condition ${cond.name}` });
  });
}

/** The trajectory gate on a validate constant-energy run: length against nve_steps (no cut: a short run is short). */
export async function nveHeld(run: HeldRun, cond: ConditionView, steps: number, timestep: number): Promise<GateRecord> {
  return runGate('trajectory', run.task, async () => {
    const a = await askedOf(run.dir, { steps, writeEvery: cond.write_every, timestep });
    return checkTrajectory([run.path], { steps: a.steps, writeEvery: a.writeEvery, timestep: a.timestep, what: `condition ${cond.name}, constant-energy run` });
  });
}
