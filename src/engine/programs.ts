/**
 * The programs a stage's command runs (the stage key `programs`: files and folders, relative to the
 * campaign file), hashed when the stage's tasks start, so the ledger says which version of each
 * program made what. A file's hash is the sha256 of its bytes; a folder's is the artifact directory
 * hash (src/ledger/artifacts.ts: sorted manifest of relative paths, contents and executable bits),
 * leaving out `__pycache__/` folders, which Python rewrites when it runs the programs.
 */
import { resolve } from 'node:path';
import { artifactId, hashArtifact } from '../ledger/artifacts.js';
import type { Stage } from './ids.js';
import type { CampaignView } from './view.js';

/** A listed program that cannot be read when the tasks start: bad input (exit 2), named by file and key. */
export class ProgramError extends Error {
  readonly exitCode = 2;
  override name = 'ProgramError';
}

const ignorePycache = (rel: string): boolean => rel === '__pycache__' || rel.endsWith('/__pycache__');

/** The stage's programs as written in the campaign. */
export function stagePrograms(view: CampaignView, stage: Stage): string[] {
  return (view.campaign.stages[stage] as { programs?: string[] }).programs ?? [];
}

/**
 * `{ "<path as written>": "sha256:<hex>" }` for each program of the stage (empty when none is listed).
 * Throws ProgramError naming the campaign file and the key when one cannot be read.
 */
export async function hashPrograms(view: CampaignView, stage: Stage): Promise<Record<string, string>> {
  const out: Record<string, string> = {};
  for (const [i, rel] of stagePrograms(view, stage).entries()) {
    const abs = resolve(view.dir, rel);
    try {
      const h = await hashArtifact(abs, { ignore: ignorePycache });
      out[rel] = artifactId(h.sha256);
    } catch (err) {
      const code = (err as NodeJS.ErrnoException).code;
      const why = code === 'ENOENT' ? 'no such file or directory' : code === 'EACCES' ? 'permission denied' : (err as Error).message;
      throw new ProgramError(`${view.file}: stages.${stage}.programs[${i}]: cannot read program ${JSON.stringify(rel)} (${abs}): ${why}`);
    }
  }
  return out;
}
