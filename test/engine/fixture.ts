/**
 * A small invented campaign for the engine tests: 4-atom argon-like fcc cells (invented data, for the
 * engine only), stage commands from fake-stage.mjs, two conditions, a committee of two.
 */
import { mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync, existsSync, readdirSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { shellQuote } from '../../src/backends/shell.js';

export const FAKE = fileURLToPath(new URL('./fake-stage.mjs', import.meta.url));
export const REPO = fileURLToPath(new URL('../../', import.meta.url));

/** fcc cell of side a with 4 atoms, displaced deterministically by frame index k. */
export function startXyz(frames = 6, a = 5.26): string {
  const basis = [
    [0, 0, 0],
    [0.5, 0.5, 0],
    [0.5, 0, 0.5],
    [0, 0.5, 0.5],
  ];
  let text = '';
  for (let k = 0; k < frames; k++) {
    text += `4\nLattice="${a} 0 0 0 ${a} 0 0 0 ${a}" Properties=species:S:1:pos:R:3 pbc="T T T"\n`;
    basis.forEach((b, i) => {
      const p = b.map((x, c) => (x * a + 0.03 * Math.sin(1 + k * 1.7 + i * 2.3 + c)).toFixed(6));
      text += `Ar ${p.join(' ')}\n`;
    });
  }
  return text;
}

export interface FixtureOptions {
  /** Directory name inside a fresh temporary directory (may hold odd characters). */
  dirName?: string;
  name?: string;
  attempts?: number;
  maxRounds?: number;
  framesPerTask?: number;
  labelParams?: Record<string, string | number | boolean>;
  maxRejected?: number;
  jobs?: number;
  /** Replace a stage's command. */
  commands?: Partial<Record<'label' | 'train' | 'validate' | 'simulate', string>>;
  extraYaml?: string;
}

export function stageCommand(mode: string): string {
  return `node ${shellQuote(FAKE)} ${mode}`;
}

/** YAML double-quoted scalar for any string (JSON strings are valid YAML). */
const y = (s: string): string => JSON.stringify(s);

export function campaignYaml(o: FixtureOptions = {}): string {
  const cmd = (m: 'label' | 'train' | 'validate' | 'simulate') => y(o.commands?.[m] ?? stageCommand(m));
  const attempts = o.attempts ?? 1;
  const params = o.labelParams
    ? `\n    params:\n${Object.entries(o.labelParams)
        .map(([k, v]) => `      ${k}: ${typeof v === 'string' ? y(v) : String(v)}`)
        .join('\n')}`
    : '';
  return `# engine test campaign (invented data)
name: ${y(o.name ?? 'engine test')}
species: [Ar]
start: start.xyz
committee:
  size: 2
  seed: 7
holdout: 0.5
rounds:
  max: ${o.maxRounds ?? 3}
  converge:
    confident_fraction: 0.9
conditions:
  - name: cold
    temperature: 30
    steps: 10
    write_every: 1
  - name: warm
    temperature: 90
    steps: 10
    write_every: 1
stages:
  sample:
    perturb:
      count: 1
    select:
      max_per_condition: 2
  label:
    command: ${cmd('label')}
    frames_per_task: ${o.framesPerTask ?? 2}
    max_rejected_fraction: ${o.maxRejected ?? 0.1}
    attempts: ${attempts}${params}
  train:
    command: ${cmd('train')}
    attempts: ${attempts}
  validate:
    command: ${cmd('validate')}
    nve_steps: 5
    # the invented 5-step runs are far too short to judge a drift by the defaults (10 frames over 1 ps)
    drift_min_frames: 3
    drift_min_span: 0
    attempts: ${attempts}
  simulate:
    command: ${cmd('simulate')}
    attempts: ${attempts}
backend:
  kind: local
  jobs: ${o.jobs ?? 2}
${o.extraYaml ?? ''}`;
}

const made: string[] = [];

/** Remove every campaign this test file made (call from afterAll). */
export function removeCampaigns(): void {
  for (const d of made.splice(0)) rmSync(d, { recursive: true, force: true });
}

/** Write a fresh campaign; returns its directory and campaign file path. */
export function makeCampaign(o: FixtureOptions = {}): { dir: string; file: string } {
  const root = mkdtempSync(join(tmpdir(), 'ratchet-engine-'));
  made.push(root);
  const dir = o.dirName ? join(root, o.dirName) : root;
  if (o.dirName) mkdirSync(dir, { recursive: true });
  writeFileSync(join(dir, 'start.xyz'), startXyz());
  const file = join(dir, 'campaign.yaml');
  writeFileSync(file, campaignYaml(o));
  return { dir, file };
}

export function ledgerLines(dir: string): string[] {
  const p = join(dir, '.ratchet', 'ledger.jsonl');
  if (!existsSync(p)) return [];
  return readFileSync(p, 'utf8').split('\n').filter(Boolean);
}

export function ledgerEvents(dir: string): Record<string, any>[] {
  return ledgerLines(dir).map((l) => JSON.parse(l));
}

/** All files below dir (relative paths), for comparing trees. */
export function listFiles(dir: string, base = ''): string[] {
  const out: string[] = [];
  for (const n of readdirSync(join(dir, base))) {
    const rel = base ? `${base}/${n}` : n;
    if (statSync(join(dir, rel)).isDirectory()) out.push(...listFiles(dir, rel));
    else out.push(rel);
  }
  return out.sort();
}

function newestMtime(dir: string): number {
  let t = 0;
  for (const n of readdirSync(dir)) {
    const p = join(dir, n);
    const s = statSync(p);
    t = Math.max(t, s.isDirectory() ? newestMtime(p) : s.mtimeMs);
  }
  return t;
}

/**
 * How to start the CLI in a child process: the built dist/cli/index.js when it is at least as new as
 * every source file (as after `npm test`'s build: much faster to start), else the sources through tsx.
 */
export function cliArgs(): string[] {
  const dist = join(REPO, 'dist/cli/index.js');
  if (existsSync(dist) && statSync(dist).mtimeMs >= newestMtime(join(REPO, 'src'))) return [dist];
  return ['--import', 'tsx', join(REPO, 'src/cli/index.ts')];
}

/**
 * A fixture campaign run through two rounds (a failed validation still explores, so both rounds make
 * trajectories whatever the drift gate says of the invented, very short constant-energy runs): what the
 * report, audit, PROV and export tests read. Returns the campaign's directory and file.
 */
export async function twoRoundCampaign(): Promise<{ dir: string; file: string }> {
  const { runCampaign } = await import('../../src/engine/run.js');
  const { BufferOutput } = await import('../../src/engine/output.js');
  const c = makeCampaign();
  writeFileSync(c.file, campaignYaml({ maxRounds: 2 }).replace('rounds:\n', 'rounds:\n  explore_unvalidated:\n    max_rounds: 2\n'));
  const out = new BufferOutput();
  await runCampaign({ campaign: c.file, out, error: (m) => out.line(`error: ${m}`) });
  return c;
}
