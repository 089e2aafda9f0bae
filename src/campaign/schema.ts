/**
 * The campaign file's schema: the single source of the campaign's types.
 *
 * Units: distances Å, forces eV/Å, energies eV (gate limits in meV as named), temperatures K,
 * pressures bar, time steps fs, walltimes as "HH:MM:SS" / "D-HH:MM:SS" / seconds (parsed to seconds),
 * memory as "4G" / "500M" / MiB (parsed to MiB), poll intervals and timeouts in seconds.
 *
 * Every object is strict: an unknown key is an error (with the nearest valid key suggested by the loader).
 * Every message is worded "expected ..."; the loader adds ", found <value>" and the file:line:column.
 * Parsed values (z.output) have all defaults filled in, walltimes in seconds, memory in MiB,
 * `start` and `setup` as lists and every condition's seed set.
 */
import { z } from 'zod';
import { SYMBOLS } from '../atoms/elements.js';
import { formatWalltime, parseMemory, parseWalltime } from './units.js';
import { LIMITS, SAMPLE_LIMITS, resolveLimit, type LimitName } from '../gates/limits.js';

/** The five stages of a round, in the order they run. */
export const STAGES = ['sample', 'label', 'train', 'validate', 'simulate'] as const;
export type StageName = (typeof STAGES)[number];

/** Where tasks run. */
export const BACKEND_KINDS = ['local', 'slurm', 'pbs', 'lsf', 'sge'] as const;
export type BackendKind = (typeof BACKEND_KINDS)[number];

// ---------------------------------------------------------------------------------------------
// Building blocks

const int = (what: string) => z.number({ error: `expected ${what}` }).int({ error: `expected ${what}` });
const num = (what: string) => z.number({ error: `expected ${what}` }).refine(Number.isFinite, { error: `expected ${what}` });
const positiveInt = (what = 'a whole number of at least 1') => int(what).min(1, { error: `expected ${what}` });
/**
 * Counts that plan tasks or work get an upper bound, so a typo (an extra zero or ten) cannot plan millions
 * of tasks or a run that never ends; the message says why. The bounds are far above any campaign in use.
 */
const bound = (what: string, max: number, why: string) => ({ error: `expected ${what} of at most ${max.toLocaleString('en-US')} (${why})` });
const PLAN_GUARD = 'a guard against a typo planning more tasks than any campaign needs';
const STEPS_GUARD = 'a guard against a typo asking for a run that would not end';
const nonNegativeInt = (what = 'a whole number of at least 0') => int(what).min(0, { error: `expected ${what}` });
const positive = (what: string) => num(what).gt(0, { error: `expected ${what}` });
const nonNegative = (what: string) => num(what).min(0, { error: `expected ${what}` });
const fraction = (what = 'a fraction from 0 to 1') => num(what).min(0, { error: `expected ${what}` }).max(1, { error: `expected ${what}` });
const text = (what = 'a non-empty string') => z.string({ error: `expected ${what}` }).min(1, { error: `expected ${what}` });
const line = (what: string) => z.string({ error: `expected ${what}` }).refine((s) => !/[\r\n]/.test(s), { error: `expected ${what} on one line` });

const WALLTIME_EXPECTED = 'expected a walltime like "02:00:00" (HH:MM:SS) or "1-12:00:00" (D-HH:MM:SS), or whole seconds';
const MEMORY_EXPECTED = 'expected a memory size like "4G" or "500M" (a plain number is MiB)';

/** A walltime: "HH:MM:SS", "D-HH:MM:SS" or whole seconds; parsed to seconds. */
export const Walltime = z
  .union([z.string().regex(/^\s*(?:(?:\d+-)?\d+:[0-5]\d:[0-5]\d|\d+)\s*$/, { error: WALLTIME_EXPECTED }), z.number().int({ error: WALLTIME_EXPECTED }).min(1, { error: WALLTIME_EXPECTED })], {
    error: WALLTIME_EXPECTED,
  })
  .transform((v, ctx) => {
    const s = parseWalltime(v);
    if (s === undefined) {
      ctx.addIssue({ code: 'custom', message: WALLTIME_EXPECTED, input: v });
      return z.NEVER;
    }
    return s;
  })
  .meta({ description: 'Walltime: "HH:MM:SS", "D-HH:MM:SS", or whole seconds.' });

/** Below this a memory request cannot be meant (a unit left out): refused with the likely intent. */
const MEMORY_FLOOR_MIB = 16;

/** A memory size: "4G", "500M", "1.5G", "2T", or a number of MiB; parsed to MiB (binary units). */
export const Memory = z
  .union([z.string().regex(/^\s*\d+(?:\.\d+)?\s*(?:[kmgtKMGT](?:i?[bB])?)?\s*$/, { error: MEMORY_EXPECTED }), z.number().gt(0, { error: MEMORY_EXPECTED })], {
    error: MEMORY_EXPECTED,
  })
  .transform((v, ctx) => {
    const mib = parseMemory(v);
    if (mib === undefined) {
      ctx.addIssue({ code: 'custom', message: MEMORY_EXPECTED, input: v });
      return z.NEVER;
    }
    // A plain small number is almost surely gigabytes meant as MiB ("memory: 4"): no task runs in 4 MiB.
    if (mib < MEMORY_FLOOR_MIB) {
      ctx.addIssue({
        code: 'custom',
        message: `expected a memory size of at least ${MEMORY_FLOOR_MIB} MiB (${typeof v === 'number' ? `a plain number is MiB: ${v} is ${v} MiB; write "${v}G" for ${v} GiB` : `${JSON.stringify(v)} is ${mib} MiB`}), found ${JSON.stringify(v)}`,
        input: v,
      });
      return z.NEVER;
    }
    return mib;
  })
  .meta({ description: 'Memory: "4G", "500M" (binary units, 1G = 1024 MiB), or a number of MiB.' });

/** Environment set-up lines, written as a list or as one block of lines; parsed to a list of lines. */
const SetupLines = z
  .union([z.string(), z.array(z.string({ error: 'expected a set-up line (a string)' }))], {
    error: 'expected set-up lines: a list of strings or one block of text',
  })
  .transform((v) => (typeof v === 'string' ? v.replace(/\r\n/g, '\n').replace(/\n+$/, '').split('\n').filter((l, i, a) => l !== '' || a.length > 1) : v))
  .refine((lines) => lines.every((l) => !l.includes('\0')), { error: 'expected set-up lines without NUL bytes (a shell cannot pass them)' })
  .meta({ description: 'Shell lines run before the command (module load ..., source a virtual environment).' });

const PARAM_NAME = /^[A-Za-z_][A-Za-z0-9_]*$/;
const Params = z
  .record(
    z.string().regex(PARAM_NAME, { error: 'expected a parameter name of letters, digits and underscores' }),
    z.union([z.string(), z.number(), z.boolean()], { error: 'expected a parameter value: a string, number or true/false' }),
  )
  .meta({ description: "Free parameters handed to the stage's command in task.json (params)." });

/** "A-B" with element symbols: a pair of species for per-pair limits. */
const PAIR = /^([A-Z][a-z]?)-([A-Z][a-z]?)$/;

/** Resources one task of a stage asks for. */
export const StageResourcesSchema = z
  .strictObject({
    cpus: positiveInt('a whole number of CPU cores of at least 1').default(1).meta({ description: 'CPU cores per task.' }),
    gpus: nonNegativeInt('a whole number of GPUs of at least 0').default(0).meta({ description: 'GPUs per task.' }),
    memory: Memory.optional().meta({ description: 'Memory per task ("4G", "500M"; MiB when a number). Absent: the site default.' }),
    walltime: Walltime.prefault('01:00:00').meta({ description: 'Walltime per task ("HH:MM:SS", "D-HH:MM:SS" or seconds).' }),
    partition: text('a partition or queue name').optional().meta({ description: 'Partition (Slurm) or queue (PBS, LSF, Grid Engine).' }),
    account: text('an account name').optional(),
    qos: text('a quality-of-service name').optional(),
    scheduler_lines: z
      .array(line('a scheduler directive line'), { error: 'expected a list of scheduler directive lines' })
      .default([])
      .meta({ description: 'Raw scheduler directive lines copied as written into the batch script header.' }),
  })
  .meta({ description: 'Resources of one task.' });

/** Keys that were renamed: old name -> new name (the loader names the new one when it meets the old). */
export const RENAMED_KEYS: Readonly<Record<string, string>> = { extra_directives: 'scheduler_lines' };

/** Interatomic contact limits used by the contacts gate. */
export const ContactsSchema = z
  .strictObject({
    scale: num('a contact scale between 0 and 2 (times the sum of covalent radii)')
      .gt(0, { error: 'expected a contact scale between 0 and 2 (times the sum of covalent radii)' })
      .max(2, { error: 'expected a contact scale between 0 and 2 (times the sum of covalent radii)' })
      .default(0.5)
      .meta({ description: 'A pair closer than scale x (covalent radius A + covalent radius B) is a contact violation.' }),
    hydrogen_scale: num('a contact scale for pairs with hydrogen between 0 and 2 (times the sum of covalent radii)')
      .gt(0, { error: 'expected a contact scale for pairs with hydrogen between 0 and 2 (times the sum of covalent radii)' })
      .max(2, { error: 'expected a contact scale for pairs with hydrogen between 0 and 2 (times the sum of covalent radii)' })
      .default(0.7)
      .meta({ description: 'Pairs with hydrogen use max(scale, hydrogen_scale) x (sum of covalent radii): H-H 0.434 Å, O-H 0.679 Å by default.' }),
    min_distance: z
      .record(
        z.string().regex(PAIR, { error: 'expected a species pair like "O-H"' }),
        positive('a distance in Å above 0'),
      )
      .default({})
      .meta({ description: 'Per-pair minimum distances in Å ("O-H": 0.8) that replace the scaled radii for that pair.' }),
  })
  .meta({ description: 'Contact limits (contacts gate).' });

const stageCommon = {
  resources: StageResourcesSchema.prefault({}),
  setup: SetupLines.default([]),
  attempts: positiveInt('a whole number of attempts of at least 1 (the first run included)')
    .default(2)
    .meta({ description: 'How many times a task may run in all, the first run included, before the stage is blocked.' }),
  params: Params.default({}),
  programs: z
    .array(text('a path to a program file or folder, relative to the campaign file'), {
      error: 'expected a list of program files or folders (paths relative to the campaign file)',
    })
    .default([])
    .meta({
      description:
        "Files and folders the stage's command runs (scripts, settings, basis sets), relative to the campaign file: hashed (sha256) into each task's record in the ledger and shown by `ratchet lineage`.",
    }),
};
const command = (stage: string) =>
  text(`a command line (a non-empty string) for the ${stage} tasks`)
    .refine((s) => s.trim() !== '', { error: `expected a command line for the ${stage} tasks, found only blanks` })
    .refine((s) => !s.includes('\0'), { error: `expected a command line for the ${stage} tasks without NUL bytes (a shell cannot pass them)` })
    .meta({ description: `Command line each ${stage} task runs (bash -c, in the task directory).` });

/** Round-0 perturbation of the starting structures. */
export const PerturbSchema = z
  .strictObject({
    count: positiveInt('a whole number of frames of at least 1').max(100_000, bound('a number of perturbed frames', 100_000, PLAN_GUARD))
      .default(10)
      .meta({ description: 'Perturbed frames made from each starting structure in round 0.' }),
    displacement: nonNegative('a displacement in Å of at least 0')
      .default(0.05)
      .meta({ description: 'Standard deviation in Å of the random Gaussian displacement of each Cartesian coordinate.' }),
    strain: num('a cell strain from 0 to below 1').min(0, { error: 'expected a cell strain from 0 to below 1' }).lt(1, { error: 'expected a cell strain from 0 to below 1' })
      .default(0.02)
      .meta({ description: 'Largest component of the random symmetric strain applied to periodic cells (0.02 = 2 %).' }),
    seed: nonNegativeInt().default(0).meta({ description: 'Random seed of the perturbation.' }),
  })
  .meta({ description: 'Round 0: random displacements and cell strains of the starting structures.' });

/** Selection of frames for labeling from the previous round's trajectories. */
export const SelectSchema = z
  .strictObject({
    window: z
      .strictObject({
        lower: nonNegative('a committee spread in eV/Å of at least 0').default(0.05).meta({ description: 'Frames with spread below this (eV/Å) are confident.' }),
        upper: positive('a committee spread in eV/Å above 0').default(0.5).meta({ description: 'Frames with spread at or above this (eV/Å) are runaway, never labeled.' }),
        calibrate: z.boolean({ error: 'expected true or false' }).default(false).meta({
          description: "Divide lower and upper by the latest measured ratio of true force error to spread (median, from at least 10 labeled frames), so the window holds for the true error.",
        }),
      })
      .prefault({})
      .meta({ description: 'Spread window [lower, upper) in eV/Å: frames inside it are informative.' }),
    max_per_condition: positiveInt('a whole number of frames of at least 1').max(1_000_000, bound('a number of frames', 1_000_000, PLAN_GUARD))
      .default(50)
      .meta({ description: 'At most this many frames picked per condition per round.' }),
    fingerprint: z
      .strictObject({
        cutoff: positive('a cutoff in Å above 0').default(6).meta({ description: 'Cutoff in Å of the per-species-pair distance histograms.' }),
        bins: int('a whole number of bins of at least 2').min(2, { error: 'expected a whole number of bins of at least 2' }).default(32).meta({ description: 'Histogram bins per species pair.' }),
      })
      .prefault({})
      .meta({ description: 'Structural fingerprint for farthest-point selection.' }),
  })
  .meta({ description: 'Which frames of the previous round go to labeling.' });

export const SampleStageSchema = z
  .strictObject({
    command: command('sample').optional().meta({ description: "Optional: a command replacing ratchet's built-in sampling." }),
    ...stageCommon,
    perturb: PerturbSchema.prefault({}),
    select: SelectSchema.prefault({}),
  }, { error: 'expected the sample stage: a mapping of its settings' })
  .meta({ description: 'Sample: round 0 perturbs the starting structures; later rounds select informative frames.' });

export const LabelStageSchema = z
  .strictObject({
    command: command('label'),
    ...stageCommon,
    frames_per_task: positiveInt('a whole number of frames of at least 1').max(1_000_000, bound('a number of frames per task', 1_000_000, PLAN_GUARD)).default(20).meta({ description: 'Frames labeled by one task.' }),
    max_force: positive('a force in eV/Å above 0').default(50).meta({ description: 'A labeled frame with any force component magnitude above this (eV/Å) is rejected.' }),
    max_rejected_fraction: fraction().default(0.1).meta({ description: 'The stage fails when more than this fraction of frames is rejected.' }),
    contacts: ContactsSchema.prefault({}),
  }, { error: 'expected the label stage: a mapping of its settings' })
  .meta({ description: 'Label: reference energies and forces, frames_per_task frames per task.' });

export const TrainStageSchema = z
  .strictObject({
    command: command('train'),
    ...stageCommon,
  }, { error: 'expected the train stage: a mapping of its settings' })
  .meta({ description: 'Train: one task per committee member.' });

/**
 * One gate limit of the table in src/gates/limits.ts (the same names and defaults as `ratchet check`): a number is
 * the fail limit; {warn, fail} sets either or both. Parsed to {warn, fail} (null = not checked), defaults filled in.
 */
const gateLimit = (name: LimitName, description: string) => {
  const d = LIMITS[name];
  const expected = `a limit in ${d.unit} above 0 (the fail limit), or a mapping {warn, fail}`;
  const value = (which: string) => positive(`a ${which} limit in ${d.unit} above 0`);
  const shown = (x: number | null) => (x === null ? 'not checked' : String(x));
  return z
    .union([value('fail'), z.strictObject({ warn: value('warn').optional(), fail: value('fail').optional() })], { error: `expected ${expected}` })
    .transform((v, ctx) => {
      if (typeof v === 'object' && v.warn !== undefined && v.fail !== undefined && v.warn > v.fail) {
        ctx.addIssue({ code: 'custom', message: `expected the warn limit at most the fail limit (warn ${v.warn} ${d.unit} is above fail ${v.fail} ${d.unit})`, input: v });
        return z.NEVER;
      }
      return resolveLimit(name, v);
    })
    .default(() => resolveLimit(name, undefined))
    .meta({ description: `${description} A number is the fail limit, or give {warn, fail}. Default: warn ${shown(d.warn)}, fail ${shown(d.fail)}.` });
};

/** Limits of the errors gate on the held-out frames. */
export const ErrorLimitsSchema = z
  .strictObject({
    energy_mae: gateLimit('energy_mae', 'Energy MAE, meV/atom.'),
    energy_rmse: gateLimit('energy_rmse', 'Energy RMSE, meV/atom.'),
    force_mae: gateLimit('force_mae', 'Force-component MAE, meV/Å, overall and for each element.'),
    force_rmse: gateLimit('force_rmse', 'Force-component RMSE, meV/Å, overall and for each element.'),
    stress_rmse: gateLimit('stress_rmse', 'Stress RMSE over the six Voigt components, GPa (frames with `stress` in both files).'),
  })
  .meta({ description: 'Error limits on the held-out frames (per element for forces).' });

export const ValidateStageSchema = z
  .strictObject({
    command: command('validate'),
    ...stageCommon,
    errors: ErrorLimitsSchema.prefault({}),
    max_drift: gateLimit('max_drift', '|slope| of total energy per atom in a constant-energy run, meV/atom/ps (a slope within 2 standard errors of zero never warns).'),
    max_excursion: gateLimit('max_excursion', 'Largest |E(t) - E(0)| of total energy per atom in a constant-energy run, meV/atom.'),
    drift_min_frames: int('a whole number of frames of at least 3')
      .min(3, { error: 'expected a whole number of frames of at least 3' })
      .default(SAMPLE_LIMITS.drift_min_frames)
      .meta({ description: 'A constant-energy run with fewer frames fails the drift gate (too few to judge).' }),
    drift_min_span: nonNegative('a run length in ps of at least 0')
      .default(SAMPLE_LIMITS.drift_min_span)
      .meta({ description: 'A constant-energy run shorter than this (ps, first to last frame) fails the drift gate.' }),
    nve_steps: positiveInt('a whole number of steps of at least 1').max(1_000_000_000, bound('a number of steps', 1_000_000_000, STEPS_GUARD)).default(1000).meta({ description: 'Steps of the constant-energy run per condition.' }),
    nve_timestep: positive('a time step in fs above 0').optional().meta({ description: "Time step of the constant-energy run in fs (default: the condition's)." }),
    contacts: ContactsSchema.prefault({}),
  }, { error: 'expected the validate stage: a mapping of its settings' })
  .meta({ description: 'Validate: errors on held-out frames and a constant-energy run per condition.' });

export const SimulateStageSchema = z
  .strictObject({
    command: command('simulate'),
    ...stageCommon,
    contacts: ContactsSchema.prefault({}),
  }, { error: 'expected the simulate stage: a mapping of its settings' })
  .meta({ description: 'Simulate: one MD task per condition, driven by the committee.' });

export const StagesSchema = z
  .strictObject({
    sample: SampleStageSchema.prefault({}),
    label: LabelStageSchema,
    train: TrainStageSchema,
    validate: ValidateStageSchema,
    simulate: SimulateStageSchema,
  }, { error: 'expected a mapping of the stages sample, label, train, validate and simulate' })
  .meta({ description: 'The five stages, each with its command, resources and gate limits.' });

const CONDITION_NAME = /^[A-Za-z0-9][A-Za-z0-9._-]*$/;

/** One exploration setting of the simulate stage. */
export const ConditionSchema = z
  .strictObject({
    name: z
      .string({ error: 'expected a condition name (letters, digits, ".", "_", "-")' })
      .regex(CONDITION_NAME, { error: 'expected a condition name (letters, digits, ".", "_", "-", starting with a letter or digit)' })
      .meta({ description: 'Name, also the task directory name of this condition.' }),
    temperature: positive('a temperature in K above 0').meta({ description: 'Temperature in K.' }),
    pressure: num('a pressure in bar').optional().meta({ description: 'Pressure in bar (1 bar = 1e5 Pa; 1 GPa = 10000 bar). Absent: constant volume.' }),
    steps: positiveInt('a whole number of steps of at least 1').max(1_000_000_000, bound('a number of steps', 1_000_000_000, STEPS_GUARD)).meta({ description: 'MD steps per round.' }),
    timestep: positive('a time step in fs above 0').default(1).meta({ description: 'MD time step in fs.' }),
    write_every: positiveInt('a whole number of steps of at least 1').default(10).meta({ description: 'A frame is written every this many steps.' }),
    start: z
      .union([text('a structure path'), nonNegativeInt('an index into start')], { error: 'expected a structure path or an index into start' })
      .default(0)
      .meta({ description: 'The structure the run starts from: an index into the top-level start list, or a path relative to the campaign file.' }),
    seed: nonNegativeInt().optional().meta({ description: "Random seed (default: the condition's position in the list)." }),
  }, { error: 'expected a condition: a mapping with name, temperature, steps ...' })
  .meta({ description: 'One exploration condition.' });

export const CommitteeSchema = z
  .strictObject({
    size: int('a committee size of at least 2').min(2, { error: 'expected a committee size of at least 2' }).max(1000, bound('a committee size', 1000, 'each member is one train task per round; committees in use have 2 to about 10 members')).default(4).meta({ description: 'Number of models M.' }),
    bootstrap: z.boolean({ error: 'expected true or false' }).default(false).meta({ description: 'Train each member on a bootstrap resample of the training set.' }),
    seed: nonNegativeInt().default(0).meta({ description: 'Base seed; member m uses a seed derived from it and m.' }),
  })
  .meta({ description: 'The committee of models whose spread estimates the error.' });

export const RoundsSchema = z
  .strictObject({
    max: positiveInt('a whole number of rounds of at least 1').max(10_000, bound('a number of rounds', 10_000, PLAN_GUARD)).default(10).meta({ description: 'Stop as exhausted after this many rounds.' }),
    converge: z
      .strictObject({
        confident_fraction: num('a fraction above 0 and at most 1')
          .gt(0, { error: 'expected a fraction above 0 and at most 1' })
          .max(1, { error: 'expected a fraction above 0 and at most 1' })
          .default(0.99)
          .meta({ description: "Converged when every condition's confident fraction reaches this (and no runaway frames, validation passed)." }),
      })
      .prefault({}),
    explore_unvalidated: z
      .strictObject({
        max_rounds: nonNegativeInt('a whole number of rounds of at least 0').max(100, { error: 'expected at most 100 rounds in a row (a guard against spending an allocation on a committee that never validates)' })
          .default(0)
          .meta({ description: 'A round whose validation fails may still explore (short runs) and label what it finds, at most this many rounds in a row; 0 stops at a failed validation.' }),
        steps_fraction: num('a fraction above 0 and at most 1')
          .gt(0, { error: 'expected a fraction above 0 and at most 1' })
          .max(1, { error: 'expected a fraction above 0 and at most 1' })
          .default(0.1)
          .meta({ description: "Share of each condition's steps run in a round that is not validated." }),
      })
      .prefault({})
      .meta({ description: 'A way forward from a committee whose validation fails (often the first one): explore anyway, never counted toward convergence.' }),
  })
  .meta({ description: 'Round limit and convergence target.' });

export const BackendSchema = z
  .strictObject({
    kind: z
      .enum(BACKEND_KINDS, { error: `expected one of ${BACKEND_KINDS.map((k) => `"${k}"`).join(', ')}` })
      .default('local')
      .meta({ description: 'Where tasks run.' }),
    jobs: positiveInt('a whole number of concurrent tasks of at least 1').optional().meta({ description: 'Local backend: tasks run at once (default: the number of CPU cores).' }),
    max_array_size: positiveInt('a whole number of at least 1').default(1000).meta({ description: "Largest job array the site accepts; larger stages are split." }),
    array_throttle: positiveInt('a whole number of at least 1').optional().meta({ description: 'At most this many elements of one array run at once (absent: no throttle).' }),
    poll_interval: positive('a number of seconds above 0').default(30).meta({ description: 'Seconds between scheduler polls.' }),
    submit_retries: nonNegativeInt().default(3).meta({ description: 'Retries of a submit call that failed transiently (time-out, busy controller).' }),
    submit_timeout: positive('a number of seconds above 0').default(120).meta({ description: 'Seconds before a scheduler command is considered timed out.' }),
    walltime_factor: num('a factor of at least 1').min(1, { error: 'expected a factor of at least 1' }).default(2).meta({ description: 'A task killed at its walltime is resubmitted with the walltime times this (1: never).' }),
    walltime_max: Walltime.optional().meta({ description: 'Escalated walltimes never exceed this.' }),
    memory_factor: num('a factor of at least 1').min(1, { error: 'expected a factor of at least 1' }).default(1).meta({ description: 'A task killed for memory is resubmitted with memory times this (1: never, it is reported).' }),
    memory_max: Memory.optional().meta({ description: 'Escalated memory never exceeds this.' }),
    template_dir: text('a directory path').optional().meta({ description: "Folder of the campaign's own batch-script templates (relative to the campaign file)." }),
  })
  .meta({ description: 'The backend and its options.' });

export const BudgetSchema = z
  .strictObject({
    core_hours: positive('a number of core-hours above 0').optional().meta({ description: 'Cap on the core-hours the whole campaign may spend.' }),
    core_hours_per_round: positive('a number of core-hours above 0').optional().meta({ description: 'Cap on the core-hours one round may spend.' }),
  })
  .meta({ description: 'Core-hour caps (absent: no cap).' });

const Species = z
  .array(
    z.enum(SYMBOLS as [string, ...string[]], { error: 'expected an element symbol like "Ar"' }),
    { error: 'expected a list of element symbols like [Si, O]' },
  )
  .min(1, { error: 'expected at least one element symbol' })
  .meta({ description: 'Element symbols of the system.' });

const Start = z
  .union([text('a structure path'), z.array(text('a structure path'), { error: 'expected a list of structure paths' }).min(1, { error: 'expected at least one structure path' })], {
    error: 'expected a path or a list of paths to extended XYZ files',
  })
  .transform((v) => (typeof v === 'string' ? [v] : v))
  .meta({ description: 'Starting structures: extended XYZ path(s) relative to the campaign file.' });

export const CampaignSchema = z
  .strictObject({
    name: text('a campaign name (a non-empty string)').meta({ description: 'Campaign name.' }),
    description: z.string({ error: 'expected a description (a string)' }).optional(),
    species: Species,
    start: Start,
    committee: CommitteeSchema.prefault({}),
    holdout: num('a fraction above 0 and below 1')
      .gt(0, { error: 'expected a fraction above 0 and below 1' })
      .lt(1, { error: 'expected a fraction above 0 and below 1' })
      .default(0.1)
      .meta({ description: 'Share of labeled frames held out for testing, chosen by a hash of frame content.' }),
    rounds: RoundsSchema.prefault({}),
    conditions: z
      .array(ConditionSchema, { error: 'expected a list of conditions' })
      .min(1, { error: 'expected at least one condition' })
      .max(1000, bound('a list of conditions', 1000, 'each condition is one simulate and one validate task per round; ' + PLAN_GUARD))
      .meta({ description: 'Exploration conditions of the simulate stage.' }),
    stages: StagesSchema,
    backend: BackendSchema.prefault({}),
    budget: BudgetSchema.prefault({}),
  })
  .superRefine((c, ctx) => {
    const seen = new Map<string, number>();
    c.species.forEach((s, i) => {
      if (seen.has(s)) ctx.addIssue({ code: 'custom', path: ['species', i], message: `expected each element once ("${s}" is also species[${seen.get(s)}])` });
      else seen.set(s, i);
    });
    const names = new Map<string, number>();
    c.conditions.forEach((cond, i) => {
      if (names.has(cond.name)) {
        ctx.addIssue({ code: 'custom', path: ['conditions', i, 'name'], message: `expected a unique condition name ("${cond.name}" is also conditions[${names.get(cond.name)}])` });
      } else names.set(cond.name, i);
      if (typeof cond.start === 'number' && cond.start >= c.start.length) {
        ctx.addIssue({ code: 'custom', path: ['conditions', i, 'start'], message: `expected an index into start (0 to ${c.start.length - 1}) or a structure path` });
      }
    });
    for (const stage of ['label', 'validate', 'simulate'] as const) {
      for (const pair of Object.keys(c.stages[stage].contacts.min_distance)) {
        const m = PAIR.exec(pair);
        for (const sym of m ? [m[1]!, m[2]!] : []) {
          if (!c.species.includes(sym)) {
            ctx.addIssue({
              code: 'custom',
              path: ['stages', stage, 'contacts', 'min_distance', pair],
              message: `expected a pair of the campaign's species (${c.species.join(', ')}), found "${pair}" ("${sym}" is not one of them)`,
              params: { at: 'key' },
            });
            break;
          }
        }
      }
    }
    const w = c.stages.sample.select.window;
    if (w.lower >= w.upper) {
      ctx.addIssue({ code: 'custom', path: ['stages', 'sample', 'select', 'window', 'upper'], message: `expected upper above lower (${w.lower} eV/Å)` });
    }
  })
  .transform((c) => ({
    ...c,
    conditions: c.conditions.map((cond, i) => ({ ...cond, seed: cond.seed ?? i })),
  }));

/** A parsed campaign: defaults filled in, walltimes in seconds, memory in MiB. */
export type Campaign = z.output<typeof CampaignSchema>;
/** A campaign as written in the file (before defaults and unit parsing). */
export type CampaignInput = z.input<typeof CampaignSchema>;
export type StageResources = z.output<typeof StageResourcesSchema>;
export type Contacts = z.output<typeof ContactsSchema>;
export type Condition = Campaign['conditions'][number];
export type Stages = Campaign['stages'];
export type SampleStage = Stages['sample'];
export type LabelStage = Stages['label'];
export type TrainStage = Stages['train'];
export type ValidateStage = Stages['validate'];
export type SimulateStage = Stages['simulate'];
export type BackendSettings = Campaign['backend'];
export type Budget = Campaign['budget'];
export type Committee = Campaign['committee'];
/** The fields every stage has. `command` is absent only for a sample stage that uses the built-in sampling. */
export type StageCommon = Pick<SampleStage, 'resources' | 'setup' | 'attempts' | 'params'> & { command?: string };

/** The settings of one stage, as the fields all stages share. */
export function stageSettings(campaign: Campaign, stage: StageName): StageCommon {
  return campaign.stages[stage];
}

/** Parse a campaign object (already read from YAML) without file checks; throws a ZodError. */
export function parseCampaign(data: unknown): Campaign {
  return CampaignSchema.parse(data);
}

/** Walltime in seconds back to "HH:MM:SS" (for messages and batch scripts). */
export { formatWalltime };
