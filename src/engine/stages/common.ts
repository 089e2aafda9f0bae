/** Small helpers the stage modules share. */
import { createHash } from 'node:crypto';
import type { GateResult } from '../../gates/types.js';
import type { GateRecord } from '../events.js';
import { taskId, type Stage } from '../ids.js';
import { abs, taskDirRel } from '../layout.js';
import { stageRecord } from '../state.js';
import type { StageContext, StageVerdict, TaskInput } from './types.js';

/** A task's seed: 31 bits of sha256("<base>:<key>"), so it is stable and differs per task. */
export function deriveSeed(base: number, key: string): number {
  return createHash('sha256').update(`${base}:${key}`).digest().readUInt32BE(0) & 0x7fffffff;
}

export function taskDir(ctx: StageContext, round: number, stage: Stage, name: string): string {
  return abs(ctx.view.dir, taskDirRel(round, stage, name));
}

/** The outputs named `file` of every task of a stage, in task order, with their registered ids. */
export function stageOutputs(ctx: StageContext, round: number, stage: Stage, file: string): { task: string; name: string; path: string; artifact?: string }[] {
  const st = stageRecord(ctx.state, round, stage);
  if (!st) throw new Error(`internal: ${taskId(round, stage, '')} has not been planned`);
  return st.tasks.map((t) => {
    const path = abs(taskDir(ctx, round, stage, t.name), file);
    return { task: t.id, name: t.name, path, artifact: ctx.artifactId(path) };
  });
}

/** The committee of a round as task inputs model_0 ... model_{M-1}. */
export function modelInputs(ctx: StageContext, round: number): Record<string, TaskInput> {
  const out: Record<string, TaskInput> = {};
  stageOutputs(ctx, round, 'train', 'model').forEach((m, k) => {
    out[`model_${k}`] = { path: m.path, artifact: m.artifact };
  });
  return out;
}

export function artifactIds(inputs: Record<string, TaskInput>): string[] {
  return Object.values(inputs)
    .map((i) => i.artifact)
    .filter((a): a is string => a !== undefined);
}

export function unique(ids: string[]): string[] {
  return [...new Set(ids)];
}

const RANK = { pass: 0, warn: 1, fail: 2 } as const;

/** Combine gate records into a stage verdict: the worst verdict, reasons of the non-passing gates. */
export function combine(gates: GateRecord[], figures?: Record<string, unknown>, extraReasons: string[] = []): StageVerdict {
  let verdict: StageVerdict['verdict'] = 'pass';
  const reasons: string[] = [...extraReasons];
  for (const g of gates) {
    if (RANK[g.verdict] > RANK[verdict]) verdict = g.verdict;
    if (g.verdict !== 'pass') {
      const where = g.task ? `${g.task}: ` : '';
      const first = g.reasons.filter(Boolean);
      reasons.push(`${where}${g.gate} ${g.verdict}${first.length ? `: ${first.join('; ')}` : ''}`);
    }
  }
  return figures ? { verdict, reasons, gates, figures } : { verdict, reasons, gates };
}

/**
 * Run one gate and keep its result as a record. A gate that cannot judge its input (missing key,
 * unreadable file) is a fail with the gate's message: a stage whose outputs cannot be checked must not pass.
 */
export async function runGate<F>(name: string, task: string | undefined, fn: () => Promise<GateResult<F>>): Promise<GateRecord> {
  try {
    const r = await fn();
    const rec: GateRecord = { gate: r.gate, verdict: r.verdict, reasons: r.reasons, figures: slim(r.figures as Record<string, unknown>) };
    if (task !== undefined) rec.task = task;
    return rec;
  } catch (err) {
    const rec: GateRecord = { gate: name, verdict: 'fail', reasons: [`could not check: ${(err as Error).message}`], figures: {} };
    if (task !== undefined) rec.task = task;
    return rec;
  }
}

/**
 * Figures as kept in the ledger: long per-frame arrays (more than 64 entries) are left out, so a
 * verdict stays one modest line; the full figures are always one `ratchet check` away.
 */
export function slim(figures: Record<string, unknown>): Record<string, unknown> {
  const out: Record<string, unknown> = {};
  for (const [k, v] of Object.entries(figures ?? {})) {
    if (Array.isArray(v) && v.length > 64) continue;
    out[k] = v;
  }
  return out;
}
