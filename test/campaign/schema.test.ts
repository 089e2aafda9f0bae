/**
 * The campaign schema: defaults, normalisation and the cross-field checks.
 * Where a default is a number of the trade it is marked: the convergence target 0.99 is the one
 * issue 4 sets; the others are common practice (no single source).
 */
import { describe, expect, it } from 'vitest';
import { ZodError } from 'zod';
import { CampaignSchema, STAGES, parseCampaign, stageSettings, type CampaignInput } from '../../src/campaign/schema.js';

function minimal(): CampaignInput & Record<string, unknown> {
  return {
    name: 'argon',
    species: ['Ar'],
    start: 'start.xyz',
    conditions: [{ name: 'c30', temperature: 30, steps: 100 }],
    stages: {
      label: { command: 'label' },
      train: { command: 'train' },
      validate: { command: 'validate' },
      simulate: { command: 'md' },
    },
  };
}

function issues(data: unknown): { path: string; message: string }[] {
  try {
    parseCampaign(data);
  } catch (err) {
    if (err instanceof ZodError) return err.issues.map((i) => ({ path: i.path.join('.'), message: i.message }));
    throw err;
  }
  return [];
}

describe('STAGES', () => {
  it('lists the five stages in the order of the design glossary', () => {
    expect(STAGES).toEqual(['sample', 'label', 'train', 'validate', 'simulate']);
  });
});

describe('defaults', () => {
  const c = parseCampaign(minimal());
  it('fills the committee, holdout, rounds and backend', () => {
    expect(c.committee).toEqual({ size: 4, bootstrap: false, seed: 0 });
    expect(c.holdout).toBe(0.1);
    expect(c.rounds).toEqual({ max: 10, converge: { confident_fraction: 0.99 }, explore_unvalidated: { max_rounds: 0, steps_fraction: 0.1 } }); // issue 4: "default 0.99"; exploring without validation is off by default
    expect(c.backend.kind).toBe('local');
    expect(c.backend.jobs).toBeUndefined();
    expect(c.budget).toEqual({});
  });
  it('fills every stage, the sample stage included when left out', () => {
    for (const s of STAGES) {
      const st = stageSettings(c, s);
      expect(st.resources).toEqual({ cpus: 1, gpus: 0, walltime: 3600, scheduler_lines: [] });
      expect(st.setup).toEqual([]);
      expect(st.attempts).toBe(2);
      expect(st.params).toEqual({});
    }
    expect(c.stages.sample.command).toBeUndefined();
    expect(c.stages.sample.perturb).toEqual({ count: 10, displacement: 0.05, strain: 0.02, seed: 0 });
    expect(c.stages.sample.select).toEqual({ window: { lower: 0.05, upper: 0.5, calibrate: false }, max_per_condition: 50, fingerprint: { cutoff: 6, bins: 32 } });
    expect(c.stages.label).toMatchObject({ frames_per_task: 20, max_force: 50, max_rejected_fraction: 0.1, contacts: { scale: 0.5, min_distance: {} } });
    // limits: the table of src/gates/limits.ts, parsed to {warn, fail} (null = not checked)
    expect(c.stages.validate).toMatchObject({
      errors: { energy_rmse: { warn: 5, fail: 10 }, force_rmse: { warn: 100, fail: 150 }, energy_mae: { warn: null, fail: null }, stress_rmse: { warn: null, fail: null } },
      max_drift: { warn: 0.1, fail: 1 },
      max_excursion: { warn: 10, fail: 100 },
      drift_min_frames: 10,
      drift_min_span: 1,
      nve_steps: 1000,
    });
    expect(c.stages.validate.nve_timestep).toBeUndefined();
  });
  it('normalises start to a list and gives each condition a seed (its position)', () => {
    const input = minimal();
    input.conditions = [
      { name: 'a', temperature: 30, steps: 10 },
      { name: 'b', temperature: 60, steps: 10, seed: 42 },
      { name: 'c', temperature: 90, steps: 10 },
    ];
    const p = parseCampaign(input);
    expect(p.start).toEqual(['start.xyz']);
    expect(p.conditions.map((k) => k.seed)).toEqual([0, 42, 2]);
    expect(p.conditions[0]).toEqual({ name: 'a', temperature: 30, steps: 10, timestep: 1, write_every: 10, start: 0, seed: 0 });
  });
  it('parses walltime to seconds, memory to MiB, and a setup block to lines', () => {
    const input = minimal();
    input.stages.label = {
      command: 'x',
      resources: { walltime: '1-02:00:00', memory: '4G', scheduler_lines: ['--constraint=skylake'] },
      setup: 'module load dft/1.0\nsource ~/venv/bin/activate\n',
    };
    const p = parseCampaign(input);
    expect(p.stages.label.resources.walltime).toBe(26 * 3600);
    expect(p.stages.label.resources.memory).toBe(4096);
    expect(p.stages.label.setup).toEqual(['module load dft/1.0', 'source ~/venv/bin/activate']);
    expect(p.stages.label.resources.scheduler_lines).toEqual(['--constraint=skylake']);
  });
  it('keeps a campaign name with spaces, quotes and shell characters as written', () => {
    const input = minimal();
    input.name = `it's "$(rm -rf ~)" \`x\`\nsecond line`;
    expect(parseCampaign(input).name).toBe(input.name);
  });
});

describe('rejections', () => {
  it('is strict at every level', () => {
    const input = minimal() as Record<string, any>;
    input.extra = 1;
    input.stages.label.frame_per_task = 3;
    input.conditions[0].temprature = 3;
    const r = CampaignSchema.safeParse(input);
    const found = (r.error?.issues ?? []).map((i) => `${i.path.join('.')}:${i.code}:${i.code === 'unrecognized_keys' ? i.keys.join(',') : ''}`);
    expect(found.sort()).toEqual([
      ':unrecognized_keys:extra',
      'conditions.0:unrecognized_keys:temprature',
      'stages.label:unrecognized_keys:frame_per_task',
    ].sort());
  });
  it('requires the command of label, train, validate and simulate but not of sample', () => {
    for (const s of ['label', 'train', 'validate', 'simulate'] as const) {
      const input = minimal() as Record<string, any>;
      delete input.stages[s].command;
      expect(issues(input)).toEqual([{ path: `stages.${s}.command`, message: `expected a command line (a non-empty string) for the ${s} tasks` }]);
    }
    const input = minimal() as Record<string, any>;
    input.stages.sample = { command: 'my-sampler' };
    expect(parseCampaign(input).stages.sample.command).toBe('my-sampler');
  });
  it('needs a committee of at least 2', () => {
    const input = minimal();
    input.committee = { size: 1 };
    expect(issues(input)).toEqual([{ path: 'committee.size', message: 'expected a committee size of at least 2' }]);
  });
  it('rejects a symbol that is no element, and a species given twice', () => {
    const input = minimal();
    input.species = ['Ar', 'Xx'];
    expect(issues(input)).toEqual([{ path: 'species.1', message: 'expected an element symbol like "Ar"' }]);
    input.species = ['Ar', 'Ne', 'Ar'];
    expect(issues(input)).toEqual([{ path: 'species.2', message: 'expected each element once ("Ar" is also species[0])' }]);
  });
  it('checks condition names are unique and start indices exist', () => {
    const input = minimal();
    input.conditions = [
      { name: 'a', temperature: 30, steps: 10 },
      { name: 'a', temperature: 60, steps: 10, start: 1 },
    ];
    expect(issues(input)).toEqual([
      { path: 'conditions.1.name', message: 'expected a unique condition name ("a" is also conditions[0])' },
      { path: 'conditions.1.start', message: 'expected an index into start (0 to 0) or a structure path' },
    ]);
  });
  it('checks per-pair contact limits name the campaign species', () => {
    const input = minimal() as Record<string, any>;
    input.stages.simulate.contacts = { min_distance: { 'Ar-Ar': 2.5, 'Ar-Ne': 2.0 } };
    expect(issues(input)).toEqual([
      { path: 'stages.simulate.contacts.min_distance.Ar-Ne', message: `expected a pair of the campaign's species (Ar), found "Ar-Ne" ("Ne" is not one of them)` },
    ]);
    input.stages.simulate.contacts = { min_distance: { 'Ar+Ar': 2.5 } };
    expect(issues(input)[0]).toMatchObject({ path: 'stages.simulate.contacts.min_distance.Ar+Ar', message: 'Invalid key in record' });
  });
  it('needs the spread window lower below upper', () => {
    const input = minimal() as Record<string, any>;
    input.stages.sample = { select: { window: { lower: 0.5, upper: 0.2 } } };
    expect(issues(input)).toEqual([{ path: 'stages.sample.select.window.upper', message: 'expected upper above lower (0.5 eV/Å)' }]);
  });
  it('rejects out-of-range fractions, temperatures and time steps', () => {
    const input = minimal() as Record<string, any>;
    input.holdout = 1;
    input.rounds = { converge: { confident_fraction: 1.2 } };
    input.conditions[0].temperature = 0;
    input.conditions[0].timestep = -1;
    input.stages.label.max_rejected_fraction = -0.1;
    expect(issues(input).map((i) => i.path).sort()).toEqual(
      ['conditions.0.temperature', 'conditions.0.timestep', 'holdout', 'rounds.converge.confident_fraction', 'stages.label.max_rejected_fraction'].sort(),
    );
  });
  it('rejects a walltime of zero or below and memory it cannot read', () => {
    const input = minimal() as Record<string, any>;
    input.stages.train.resources = { walltime: -1, memory: '4X' };
    expect(issues(input)).toEqual([
      { path: 'stages.train.resources.memory', message: 'expected a memory size like "4G" or "500M" (a plain number is MiB)' },
      { path: 'stages.train.resources.walltime', message: 'expected a walltime like "02:00:00" (HH:MM:SS) or "1-12:00:00" (D-HH:MM:SS), or whole seconds' },
    ]);
  });
  it('rejects a scheduler directive spanning lines (it would break the batch script header)', () => {
    const input = minimal() as Record<string, any>;
    input.stages.train.resources = { scheduler_lines: ['--exclusive\n#SBATCH --x'] };
    expect(issues(input)).toEqual([{ path: 'stages.train.resources.scheduler_lines.0', message: 'expected a scheduler directive line on one line' }]);
  });
  it('accepts every backend kind and nothing else', () => {
    for (const kind of ['local', 'slurm', 'pbs', 'lsf', 'sge']) {
      expect(CampaignSchema.safeParse({ ...minimal(), backend: { kind } }).success).toBe(true);
    }
    expect(issues({ ...minimal(), backend: { kind: 'condor' } })[0]!.path).toBe('backend.kind');
  });
});
