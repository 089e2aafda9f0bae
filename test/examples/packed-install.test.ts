/**
 * The demo from an installed package, outside the repository: `npm pack` the built package, install the
 * tarball into a fresh prefix, `ratchet init --example argon DIR` with the installed command, reduce the
 * copy's settings the way argon-reduced.ts does (two conditions, shorter runs), and run it with the
 * installed `ratchet run` from a folder outside the repository. No tsx, no devDependency: the stage
 * programs run with plain node from the package's dist/demo/.
 * Checked from the copy's own ledger: the campaign ends converged, every stage task exited 0, and the
 * commands that ran name the installed package, not the repository.
 *
 * Needs a built package (`npm test` builds first) and npm able to install the dependencies (from its cache
 * or the registry): skipped with a message when the tarball's dependencies cannot be installed.
 */
import { execFileSync, spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, readdirSync, realpathSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ROUNDS_DIR } from '../../src/engine/layout.js';

const REPO = fileURLToPath(new URL('../../', import.meta.url));
const root = realpathSync(mkdtempSync(join(tmpdir(), 'ratchet-packed-')));
const prefix = join(root, 'prefix');
const camp = join(root, 'my-argon');
const bin = join(prefix, 'node_modules/.bin/ratchet');
let installProblem: string | undefined;

/** The reduced settings of test/examples/argon-reduced.ts, applied to the copied demo campaign. */
function reduce(text: string): string {
  const edits: [RegExp, string][] = [
    [/^holdout: .*$/m, 'holdout: 0.2'],
    [/^rounds: .*$/m, 'rounds: { max: 6, converge: { confident_fraction: 0.98 } }'],
    [/^conditions:\n(  - .*\n)+/m,
      'conditions:\n' +
        '  - { name: solid-30K,   temperature: 30,  steps: 1000, timestep: 5, write_every: 20, start: 0 }\n' +
        '  - { name: liquid-120K, temperature: 120, steps: 1000, timestep: 5, write_every: 20, start: 1 }\n'],
    [/perturb: \{ count: 10,/, 'perturb: { count: 8,'],
    [/max_per_condition: 10 \}/, 'max_per_condition: 8 }'],
    [/frames_per_task: 20/, 'frames_per_task: 16'],
    [/nve_steps: 1000/, 'nve_steps: 200\n    params: { equilibration_steps: 400 }'],
  ];
  for (const [re, to] of edits) {
    if (!re.test(text)) throw new Error(`the demo campaign no longer has ${re}: update reduce() in this test`);
    text = text.replace(re, to);
  }
  return text;
}

beforeAll(() => {
  if (!existsSync(join(REPO, 'dist/demo/examples/argon/label.js')) || !existsSync(join(REPO, 'dist/cli/index.js'))) {
    throw new Error(`${join(REPO, 'dist')}: the package is not built (run \`npm run build\` first; \`npm test\` does)`);
  }
  execFileSync('npm', ['pack', '--ignore-scripts', '--pack-destination', root], { cwd: REPO, stdio: 'pipe' });
  const tgz = readdirSync(root).find((f) => f.endsWith('.tgz'));
  if (!tgz) throw new Error(`npm pack wrote no tarball into ${root}`);
  const inst = spawnSync('npm', ['install', '--prefix', prefix, join(root, tgz), '--prefer-offline', '--no-audit', '--no-fund', '--ignore-scripts'], {
    cwd: root,
    encoding: 'utf8',
  });
  if (inst.status !== 0) {
    installProblem = `npm install of the packed tarball failed (no registry and not all dependencies cached?):\n${inst.stderr.slice(-2000)}`;
    console.warn(`packed-install test skipped: ${installProblem}`);
  }
}, 300_000);
afterAll(() => rmSync(root, { recursive: true, force: true }));

describe('the argon demo from an installed package', () => {
  it('`ratchet init --example argon` writes a copy whose commands run the installed programs with plain node', (ctx) => {
    if (installProblem) ctx.skip();
    const init = spawnSync(bin, ['init', '--example', 'argon', camp], { cwd: root, encoding: 'utf8' });
    expect(init.stderr).toBe('');
    expect(init.status).toBe(0);
    const text = readFileSync(join(camp, 'campaign.yaml'), 'utf8');
    const commands = [...text.matchAll(/^\s*command: (.*)$/gm)].map((m) => JSON.parse(m[1]) as string);
    expect(commands).toHaveLength(4);
    for (const c of commands) {
      const dir = join(prefix, 'node_modules/ratchet/dist/demo/examples/argon').replace(/[.*+?^${}()|[\]\\]/g, '\\$&');
      expect(c).toMatch(new RegExp(`^node '?${dir}/(label|train|validate|md)\\.js'?$`));
      expect(c).not.toContain('tsx');
    }
    expect(existsSync(join(camp, 'start-fcc.xyz')) && existsSync(join(camp, 'start-liquid.xyz'))).toBe(true);
    // A second init into the same folder refuses to overwrite, naming the file.
    const again = spawnSync(bin, ['init', '--example', 'argon', camp], { cwd: root, encoding: 'utf8' });
    expect(again.status).toBe(2);
    expect(again.stderr).toContain(`${join(camp, 'campaign.yaml')}: already exists`);
    writeFileSync(join(camp, 'campaign.yaml'), reduce(text));
  });

  it('runs the reduced copy to convergence from outside the repository', (ctx) => {
    if (installProblem) ctx.skip();
    // No tsx and no repository on any path the programs could resolve from.
    const env = { ...process.env, NODE_OPTIONS: '', NODE_PATH: '' };
    const run = spawnSync(bin, ['run', 'campaign.yaml', '--jobs', '2'], { cwd: camp, env, encoding: 'utf8', maxBuffer: 64 << 20 });
    const ledger = readFileSync(join(camp, '.ratchet/ledger.jsonl'), 'utf8').trim().split('\n').map((l) => JSON.parse(l));
    const ended = ledger.filter((e) => e.type === 'campaign_ended');
    if (run.status !== 0 || ended.length !== 1) {
      // Say why: the run's own last lines name the failing task and its stderr.log.
      throw new Error(`ratchet run exited ${run.status}:\n${run.stdout.slice(-3000)}\n${run.stderr.slice(-2000)}`);
    }
    expect(ended[0].state).toBe('converged');
    const ended_tasks = ledger.filter((e) => e.type === 'task_ended');
    expect(ended_tasks.length).toBeGreaterThan(0);
    for (const e of ended_tasks) expect(e.exit_code, `task ${e.task}`).toBe(0);
    // The task scripts ran the installed package's programs.
    const firstLabel = ledger.find((e) => e.type === 'task_ended' && /^r0\/label\//.test(e.task)).task as string;
    const script = readFileSync(join(camp, ROUNDS_DIR, ...firstLabel.split('/'), 'run.sh'), 'utf8');
    expect(script).toContain(join(prefix, 'node_modules/ratchet/dist/demo/examples/argon/label.js'));
  }, 900_000);
});
