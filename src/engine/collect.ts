/**
 * Collecting a stage whose tasks all succeeded: register every task's outputs as artifacts (with the
 * producing task, its input artifacts, the command, the campaign's hash and the tool's version), then
 * let the stage make its own outputs (merges). Idempotent: outputs already registered with the same
 * content are skipped, so a crash half-way only means collecting again.
 */
import { join } from 'node:path';
import type { Engine } from './context.js';
import { exists } from './fsutil.js';
import type { Stage } from './ids.js';
import { readTaskJson, taskDirOf } from './execute.js';
import { STAGE_DEFS } from './stages/index.js';
import type { NewArtifact } from './stages/types.js';
import { stageRecord } from './state.js';
import { killPoint } from './testhook.js';

/** Register the stage's outputs. Returns plain-words problems (missing outputs); empty when all is well. */
export async function collectStage(engine: Engine, round: number, stage: Stage): Promise<string[]> {
  const st = stageRecord(engine.state, round, stage);
  if (!st) throw new Error(`internal: r${round}/${stage} is not planned`);
  const list: NewArtifact[] = [];
  const missing: string[] = [];
  for (const t of st.tasks) {
    const json = await readTaskJson(engine, t);
    const dir = taskDirOf(engine, t);
    const inputs = [...new Set(Object.values(json.input_artifacts ?? {}))];
    for (const [name, rel] of Object.entries(json.outputs)) {
      const p = join(dir, rel);
      if (!(await exists(p))) {
        missing.push(`${t.id} ended with exit code 0 but did not write its ${name} (expected ${engine.rel(p)})`);
        continue;
      }
      list.push({
        path: p,
        role: json.output_roles?.[name] ?? name,
        inputs,
        task: t.id,
        command: json.builtin ? 'ratchet built-in sample policy' : engine.view.stages[stage].command,
      });
    }
  }
  if (missing.length > 0) return missing;
  await engine.registerMany(list);
  const def = STAGE_DEFS[stage];
  if (def.collect) {
    await def.collect(engine.stageContext(round));
    killPoint('merged');
  }
  return [];
}
