/**
 * The argon demo campaign reduced for tests (examples/argon's stage programs, two of its conditions,
 * shorter runs), written into a directory of the test's own with the demo's start structures.
 * Used by the local-backend loop test (argon-loop.test.ts) and the real-Slurm one (test/slurm).
 */
import { copyFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';

const REPO = fileURLToPath(new URL('../../', import.meta.url));
export const ARGON = join(REPO, 'examples/argon');
// The stage programs are TypeScript; the campaign lies in a temporary directory, so tsx is named by path.
const TSX = pathToFileURL(join(REPO, 'node_modules/tsx/dist/loader.mjs')).href;
export const LOWER = 0.012;
export const UPPER = 0.2;
export const MIN_DISTANCE = 2.5;

export interface ReducedOptions {
  name?: string;
  /** The YAML of the backend block's value (default: the local backend with 2 jobs). */
  backend?: string;
}

export function reducedArgonCampaign(o: ReducedOptions = {}): string {
  const cmd = (p: string) => JSON.stringify(`node --import ${TSX} ${JSON.stringify(join(ARGON, p))}`);
  return `# reduced argon demo (test)
name: ${JSON.stringify(o.name ?? 'argon-demo-reduced')}
species: [Ar]
start: [start-fcc.xyz, start-liquid.xyz]
committee: { size: 4, bootstrap: true, seed: 0 }
holdout: 0.2
rounds: { max: 6, converge: { confident_fraction: 0.98 } }
conditions:
  - { name: solid-30K,   temperature: 30,  steps: 1000, timestep: 5, write_every: 20, start: 0 }
  - { name: liquid-120K, temperature: 120, steps: 1000, timestep: 5, write_every: 20, start: 1 }
stages:
  sample:
    perturb: { count: 8, displacement: 0.05, strain: 0.02 }
    select: { window: { lower: ${LOWER}, upper: ${UPPER} }, max_per_condition: 8 }
  label:
    command: ${cmd('label.ts')}
    frames_per_task: 16
    contacts: { min_distance: { "Ar-Ar": ${MIN_DISTANCE} } }
  train:
    command: ${cmd('train.ts')}
  validate:
    command: ${cmd('validate.ts')}
    nve_steps: 200
    params: { equilibration_steps: 400 }
    max_drift: 0.1
    errors: { energy_rmse: 5, force_rmse: 20 }
    contacts: { min_distance: { "Ar-Ar": ${MIN_DISTANCE} } }
  simulate:
    command: ${cmd('md.ts')}
    contacts: { min_distance: { "Ar-Ar": ${MIN_DISTANCE} } }
backend: ${o.backend ?? '{ kind: local, jobs: 2 }'}
`;
}

/** Write the reduced campaign and the demo's start structures into dir; returns the campaign file. */
export function writeReducedArgon(dir: string, o: ReducedOptions = {}): string {
  copyFileSync(join(ARGON, 'start-fcc.xyz'), join(dir, 'start-fcc.xyz'));
  copyFileSync(join(ARGON, 'start-liquid.xyz'), join(dir, 'start-liquid.xyz'));
  const file = join(dir, 'campaign.yaml');
  writeFileSync(file, reducedArgonCampaign(o));
  return file;
}
