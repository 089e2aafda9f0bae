/**
 * Job arrays: grouping and splitting at the site's largest array, the manifest, and the array script
 * run for real with bash: element k must run exactly task k's run.sh (the common body with that
 * task's values), whatever the campaign folder is called.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, readFileSync, readdirSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { ARRAY_INDEX_VAR, manifestText, planUnits, writeArrayFiles } from '../../../src/backends/arrays.js';
import type { SchedulerName } from '../../../src/backends/directives.js';
import { LsfBackend } from '../../../src/backends/lsf.js';
import { PbsBackend } from '../../../src/backends/pbs.js';
import { SgeBackend } from '../../../src/backends/sge.js';
import { SlurmBackend } from '../../../src/backends/slurm.js';
import type { TaskSpec } from '../../../src/backends/backend.js';
import { removeTempDirs, task, tempDir, writeTask } from './helpers.js';

afterAll(removeTempDirs);

describe('planUnits', () => {
  const mk = (n: number, over = {}): TaskSpec => ({
    id: `r0/label/${n}`,
    round: 0,
    stage: 'label',
    dir: `/c/rounds/0/label/${String(n).padStart(4, '0')}`,
    command: 'true',
    setup: [],
    env: {},
    resources: { cpus: 1, gpus: 0, memory_mb: 100, walltime_s: 600 },
    name: `demo.r0/label/${n}`,
    ...over,
  });

  it('splits 2,500 tasks into arrays of at most max_array_size, in order', () => {
    const tasks = Array.from({ length: 2500 }, (_, i) => mk(i));
    const units = planUnits(tasks, { maxArraySize: 1000 });
    expect(units.map((u) => [u.kind, u.tasks.length])).toEqual([['array', 1000], ['array', 1000], ['array', 500]]);
    expect(units.flatMap((u) => u.tasks.map((t) => t.id))).toEqual(tasks.map((t) => t.id));
    expect(new Set(units.map((u) => u.name)).size).toBe(3);
  });
  it('submits a lone task (or a last chunk of one) as a single job', () => {
    const units = planUnits([mk(0), mk(1), mk(2)], { maxArraySize: 2 });
    expect(units.map((u) => [u.kind, u.tasks.length])).toEqual([['array', 2], ['single', 1]]);
    expect(planUnits([mk(0)], { maxArraySize: 1000 })[0].kind).toBe('single');
    expect(planUnits([mk(0), mk(1)], { maxArraySize: 1 }).map((u) => u.kind)).toEqual(['single', 'single']);
  });
  it('groups by identical resources: a task with a longer walltime gets its own submission', () => {
    const longer = mk(1, { resources: { cpus: 1, gpus: 0, memory_mb: 100, walltime_s: 1200 } });
    const units = planUnits([mk(0), longer, mk(2), mk(3)], { maxArraySize: 1000 });
    expect(units.map((u) => u.tasks.map((t) => t.id))).toEqual([['r0/label/0', 'r0/label/2', 'r0/label/3'], ['r0/label/1']]);
  });
  it('gives the same tasks the same key and name (so a crashed submission can be recognised)', () => {
    const a = planUnits([mk(0), mk(1)], { maxArraySize: 10 })[0];
    const b = planUnits([mk(0), mk(1)], { maxArraySize: 10 })[0];
    const c = planUnits([mk(0), mk(2)], { maxArraySize: 10 })[0];
    expect(a.key).toBe(b.key);
    expect(a.name).toBe(b.name);
    expect(c.key).not.toBe(a.key);
    expect(a.name).toMatch(/^demo\.r0\.label\.a[0-9a-f]{10}$/);
  });
  it('refuses a bad max_array_size', () => {
    expect(() => planUnits([mk(0)], { maxArraySize: 0 })).toThrow(/max_array_size/);
  });
});

const BACKENDS: [SchedulerName, () => { render: SlurmBackend['render']; templates: SlurmBackend['templates'] }][] = [
  ['slurm', () => new SlurmBackend()],
  ['pbs', () => new PbsBackend()],
  ['lsf', () => new LsfBackend()],
  ['sge', () => new SgeBackend()],
];

describe.each(BACKENDS)('%s array script, run with bash', (scheduler, make) => {
  it('element k runs task k (campaign folder with spaces, quotes and $)', () => {
    const root = join(tempDir(), `camp "a" $x 'b'`);
    const backend = make();
    const tasks = [0, 1, 2, 3].map((i) =>
      writeTask(backend, task(root, String(i).padStart(4, '0'), { command: `printf 'I am %s\\n' "$RATCHET_TASK"`, resources: { cpus: 1, gpus: 0, memory_mb: 100, walltime_s: 600 } })),
    );
    const [unit] = planUnits(tasks, { maxArraySize: 100 });
    const files = writeArrayFiles(scheduler, unit, backend.templates, 2);
    expect(readFileSync(files.manifest, 'utf8')).toBe('0000\n0001\n0002\n0003\n');
    expect(manifestText(unit)).toBe(readFileSync(files.manifest, 'utf8'));
    // No temporary files left behind by the atomic writes.
    expect(readdirSync(files.dir).sort()).toEqual([`${unit.key}.sh`, `${unit.key}.tasks`]);

    const r = spawnSync('bash', [files.script], { env: { ...process.env, [ARRAY_INDEX_VAR[scheduler]]: '3' }, encoding: 'utf8' });
    expect(r.status).toBe(0);
    expect(readFileSync(join(tasks[2].dir, 'stdout.log'), 'utf8')).toBe('I am r0/label/0002\n');
    expect(JSON.parse(readFileSync(join(tasks[2].dir, 'exit.json'), 'utf8')).exit_code).toBe(0);
    for (const other of [0, 1, 3]) expect(existsSync(join(tasks[other].dir, 'exit.json'))).toBe(false);
  });

  it('fails clearly without an index or past the manifest', () => {
    const backend = make();
    const root = tempDir();
    const tasks = ['0000', '0001'].map((n) => writeTask(backend, task(root, n)));
    const [unit] = planUnits(tasks, { maxArraySize: 10 });
    const files = writeArrayFiles(scheduler, unit, backend.templates, undefined);
    const env = { ...process.env };
    delete env[ARRAY_INDEX_VAR[scheduler]];
    const none = spawnSync('bash', [files.script], { env, encoding: 'utf8' });
    expect(none.status).toBe(1);
    expect(none.stderr).toContain(`${ARRAY_INDEX_VAR[scheduler]} is not set to an array index`);
    const past = spawnSync('bash', [files.script], { env: { ...process.env, [ARRAY_INDEX_VAR[scheduler]]: '9' }, encoding: 'utf8' });
    expect(past.status).toBe(1);
    expect(past.stderr).toContain('line 9 of');
  });
});
