/**
 * Golden files: the complete rendered batch script of one task and one array for each scheduler,
 * compared byte for byte with test/backends/cluster/golden/*.sh, and every one parsed with `bash -n`
 * (GNU Bash Reference Manual, 4.3.1 The Set Builtin, -n: read commands but do not execute them).
 * The directive syntax in each file follows the manual named in golden/README.md.
 * Regenerate after an intended change with RATCHET_UPDATE_GOLDEN=1 and review the diff.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import type { Resources, TaskSpec } from '../../../src/backends/backend.js';
import { arrayScript, planUnits } from '../../../src/backends/arrays.js';
import type { SchedulerName } from '../../../src/backends/directives.js';
import { LsfBackend } from '../../../src/backends/lsf.js';
import { PbsBackend } from '../../../src/backends/pbs.js';
import { SgeBackend } from '../../../src/backends/sge.js';
import { SlurmBackend } from '../../../src/backends/slurm.js';
import type { ClusterBackend } from '../../../src/backends/cluster.js';

const GOLDEN = join(import.meta.dirname, 'golden');
const UPDATE = process.env.RATCHET_UPDATE_GOLDEN === '1';

/** A campaign folder with a space and a quote, a command and values that mean something to bash. */
const CAMPAIGN = "/home/ada/campaigns/argon's run";

const RESOURCES: Record<SchedulerName, Resources> = {
  slurm: { cpus: 4, gpus: 1, memory_mb: 4096, walltime_s: 5400, partition: 'compute', account: 'proj-42', qos: 'normal', extra: ['--constraint=v100'] },
  pbs: { cpus: 4, gpus: 1, memory_mb: 4096, walltime_s: 5400, partition: 'workq', account: 'proj-42', extra: ['-l place=pack'] },
  lsf: { cpus: 4, gpus: 1, memory_mb: 4096, walltime_s: 5400, partition: 'normal', account: 'proj-42', extra: ['-R "select[avx2]"'] },
  sge: { cpus: 4, gpus: 0, memory_mb: 4096, walltime_s: 5400, partition: 'all.q', account: 'proj-42', extra: ['-l arch=lx-amd64'] },
};

function spec(scheduler: SchedulerName, n: number): TaskSpec {
  const name = String(n).padStart(4, '0');
  return {
    id: `r1/label/${name}`,
    round: 1,
    stage: 'label',
    dir: `${CAMPAIGN}/rounds/1/label/${name}`,
    command: `python label.py --in "$RATCHET_IN_FRAMES" --note 'it''s $(not run)'`,
    setup: ['module load python/3.11', 'source "$HOME/venvs/mlip/bin/activate"'],
    env: { RATCHET_SEED: '17', RATCHET_IN_FRAMES: `${CAMPAIGN}/rounds/1/sample/0000/frames.xyz` },
    resources: RESOURCES[scheduler],
    name: `argon's run.r1/label/${name}`,
  };
}

const BACKENDS: Record<SchedulerName, () => ClusterBackend> = {
  slurm: () => new SlurmBackend(),
  pbs: () => new PbsBackend(),
  lsf: () => new LsfBackend(),
  sge: () => new SgeBackend(),
};

function bashN(text: string): { ok: boolean; stderr: string } {
  const r = spawnSync('bash', ['-n'], { input: text, encoding: 'utf8' });
  return { ok: r.status === 0, stderr: r.stderr };
}

function golden(file: string, text: string): void {
  const path = join(GOLDEN, file);
  if (UPDATE || !existsSync(path)) {
    if (!UPDATE) throw new Error(`golden file ${path} is missing: run with RATCHET_UPDATE_GOLDEN=1 and review it`);
    writeFileSync(path, text);
  }
  expect(text).toBe(readFileSync(path, 'utf8'));
}

describe.each(Object.keys(BACKENDS) as SchedulerName[])('%s scripts', (scheduler) => {
  const backend = BACKENDS[scheduler]();

  it('renders one task exactly as the golden file, and bash -n accepts it', () => {
    const text = backend.render(spec(scheduler, 7));
    golden(`${scheduler}-task.sh`, text);
    const r = bashN(text);
    expect(r.stderr).toBe('');
    expect(r.ok).toBe(true);
  });

  it('renders an array of 3 (throttle 2) exactly as the golden file, and bash -n accepts it', () => {
    const tasks = [1, 2, 3].map((n) => spec(scheduler, n));
    const [unit] = planUnits(tasks, { maxArraySize: 1000 });
    expect(unit.kind).toBe('array');
    const text = arrayScript(scheduler, unit, backend.templates, 2, `${CAMPAIGN}/rounds/1/label/.arrays/${unit.key}.tasks`);
    golden(`${scheduler}-array.sh`, text);
    expect(bashN(text).ok).toBe(true);
  });

  it('puts every directive before the first command (the schedulers stop reading directives there)', () => {
    const lines = backend.render(spec(scheduler, 7)).split('\n');
    const firstCommand = lines.findIndex((l, i) => i > 0 && l.trim() !== '' && !l.startsWith('#'));
    const prefix = { slurm: '#SBATCH', pbs: '#PBS', lsf: '#BSUB', sge: '#$' }[scheduler];
    const lastDirective = lines.map((l) => l.startsWith(`${prefix} `)).lastIndexOf(true);
    expect(lastDirective).toBeGreaterThan(0);
    expect(lastDirective).toBeLessThan(firstCommand);
  });
});
