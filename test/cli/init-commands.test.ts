/**
 * The starter campaign's commands work as written. A task's command runs with bash in its own task
 * directory (rounds/<round>/<stage>/<task>/), so a program kept beside the campaign file must be named
 * through $RATCHET_CAMPAIGN_DIR, which every task's run.sh exports (src/engine/plan.ts). Each starter
 * command is run here the same way: bash -c in an empty task directory, with that variable set, and
 * with small stand-in programs beside the campaign file. The old form (`python3 label.py`) is run too,
 * to show the check can fail.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { loadCampaign } from '../../src/campaign/load.js';
import { writeStarter } from '../../src/campaign/starter.js';

const root = mkdtempSync(join(tmpdir(), 'ratchet-init-commands-'));
afterAll(() => rmSync(root, { recursive: true, force: true }));

const STAGES = ['label', 'train', 'validate', 'simulate'] as const;

function runInTaskDir(dir: string, command: string, stage: string) {
  const task = join(dir, 'rounds', 'r0', stage, '0000');
  mkdirSync(task, { recursive: true });
  const r = spawnSync('bash', ['-c', command], { cwd: task, encoding: 'utf8', env: { ...process.env, RATCHET_CAMPAIGN_DIR: dir } });
  return { ...r, task };
}

describe('ratchet init: commands that work as written', () => {
  it('names each stage program through $RATCHET_CAMPAIGN_DIR, so it runs from the task directory', async () => {
    const dir = join(root, 'proj with space');
    const { campaign } = await writeStarter(dir);
    const c = (await loadCampaign(campaign)).campaign;
    for (const stage of STAGES) {
      const command = c.stages[stage].command!;
      expect(command, stage).toMatch(/^python3 "\$RATCHET_CAMPAIGN_DIR\/[a-z]+\.py"$/);
      // A stand-in program: writes where it ran into the task directory.
      const program = /\/([a-z]+\.py)"/.exec(command)![1];
      writeFileSync(join(dir, program), 'import os\nopen("ran.txt", "w").write(os.getcwd())\n');
      const r = runInTaskDir(dir, command, stage);
      expect(r.status, `${stage}: ${r.stderr}`).toBe(0);
      expect(existsSync(join(r.task, 'ran.txt')), stage).toBe(true);
      expect(readFileSync(join(r.task, 'ran.txt'), 'utf8')).toBe(r.task);
    }
    // The bare name, as the starter used to write it, is looked for in the task directory and fails.
    const old = runInTaskDir(dir, 'python3 label.py', 'label-old');
    expect(old.status).not.toBe(0);
    expect(old.stderr).toMatch(/can't open file|No such file/);
  });

  it('mentions programs (commented out: the starter ships no programs)', async () => {
    const dir = join(root, 'commented');
    const { campaign } = await writeStarter(dir);
    const text = readFileSync(campaign, 'utf8');
    expect(text).toMatch(/^\s*# programs: \[label\.py\]/m);
    expect((await loadCampaign(campaign)).campaign.stages.label.programs).toEqual([]);
  });
});
