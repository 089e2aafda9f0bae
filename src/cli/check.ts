import { InvalidArgumentError, Option, type Command } from 'commander';
import {
  COMMITTEE_DEFAULTS,
  CONTACTS_DEFAULTS,
  DRIFT_DEFAULTS,
  DRIFT_LIMIT_NAMES,
  ERRORS_DEFAULTS,
  ERRORS_LIMIT_NAMES,
  LIMITS,
  optionStem,
  type LimitName,
} from '../gates/defaults.js';
import { GateInputError } from '../gates/types.js';
import { reportCheck } from '../gates/run.js';
import type { GateResult } from '../gates/types.js';

const number = (value: string): number => {
  const x = Number(value);
  if (value.trim() === '' || !Number.isFinite(x)) throw new InvalidArgumentError(`expected a number, found '${value}'`);
  return x;
};
const positive = (value: string): number => {
  const x = number(value);
  if (!(x > 0)) throw new InvalidArgumentError(`expected a positive number, found '${value}'`);
  return x;
};
const count = (value: string): number => {
  const x = number(value);
  if (!Number.isInteger(x) || x < 1) throw new InvalidArgumentError(`expected a positive whole number, found '${value}'`);
  return x;
};
const oneOf =
  (...choices: string[]) =>
  (value: string): string => {
    if (!choices.includes(value)) throw new InvalidArgumentError(`expected one of ${choices.join(', ')}, found '${value}'`);
    return value;
  };
/** --pair-limit A-B=2.5 (repeatable; also comma-separated). */
const pairLimit = (value: string, previous: Record<string, number> = {}): Record<string, number> => {
  const out = { ...previous };
  for (const item of value.split(',')) {
    const m = /^\s*([^=\s]+-[^=\s]+)\s*=\s*(\S+)\s*$/.exec(item);
    const x = m ? Number(m[2]) : NaN;
    if (!m || !(x > 0)) throw new InvalidArgumentError(`expected SPECIES-SPECIES=DISTANCE in Å such as O-H=0.8, found '${item}'`);
    out[m[1]] = x;
  }
  return out;
};

const camel = (flag: string): string => flag.replace(/-([a-z])/g, (_, c: string) => c.toUpperCase());

/** --<name>-warn and --<name>-fail for each limit of the one table (limits.ts), named as in the campaign file. */
function limitOptions(cmd: Command, names: readonly LimitName[]): Command {
  for (const name of names) {
    const d = LIMITS[name];
    for (const which of ['warn', 'fail'] as const) {
      const dv = d[which];
      cmd.option(
        `--${optionStem(name)}-${which} <value>`,
        `${which} above this ${d.what}, ${d.unit} (default ${dv === null ? 'not checked' : dv}; campaign key ${name})`,
        positive,
      );
    }
  }
  return cmd;
}

/** The limits given on the command line, by table name (left out when neither warn nor fail was given). */
function givenLimits<N extends LimitName>(o: Record<string, unknown>, names: readonly N[]): Partial<Record<N, { warn?: number; fail?: number }>> {
  const out: Partial<Record<N, { warn?: number; fail?: number }>> = {};
  for (const name of names) {
    const warn = o[camel(`${optionStem(name)}-warn`)] as number | undefined;
    const fail = o[camel(`${optionStem(name)}-fail`)] as number | undefined;
    if (warn !== undefined || fail !== undefined) out[name] = { ...(warn !== undefined ? { warn } : {}), ...(fail !== undefined ? { fail } : {}) };
  }
  return out;
}

const limitFlag = (name: string, which: 'warn' | 'fail') => `--${optionStem(name)}-${which}`;

/** Old option names that were renamed: using one is bad input that names the new one. */
const RENAMED_DRIFT: Record<string, string> = {
  '--slope-warn': '--max-drift-warn',
  '--slope-fail': '--max-drift-fail',
  '--excursion-warn': '--max-excursion-warn',
  '--excursion-fail': '--max-excursion-fail',
};

function refuseRenamed(o: Record<string, unknown>, renamed: Record<string, string>): void {
  for (const [old, now] of Object.entries(renamed))
    if (o[camel(old.slice(2))] !== undefined)
      throw new GateInputError(`${old} was renamed: use ${now} (the same name as the campaign key ${now.slice(2).replace(/-(warn|fail)$/, '').replace(/-/g, '_')})`);
}

/**
 * `ratchet check contacts|drift|errors|committee FILE... [options] [--json]`. Each gate's module is loaded when its
 * command runs (start-up time counts when checking many files one by one).
 */
export function register(program: Command): void {
  const check = program
    .command('check')
    .description('physical checks of extended XYZ files (contacts, drift, errors, committee); exit 0 pass/warn, 1 fail, 2 bad input');
  // usage errors are bad input: exit code 2 (help and version stay 0)
  check.exitOverride((err) => process.exit(err.exitCode === 0 ? 0 : 2));
  const run = (gate: string, json: boolean | undefined, work: () => Promise<GateResult<object>>) =>
    reportCheck(gate, work, { json }).then((code) => {
      process.exitCode = code;
    });

  check
    .command('contacts')
    .description('closest distances overall and per species pair, and every pair closer than its limit')
    .argument('<files...>', 'extended XYZ files (frames numbered across the files in order)')
    .option('--scale <x>', 'limit = x times the sum of covalent radii (Cordero et al. 2008); a factor, no unit', positive, CONTACTS_DEFAULTS.scale)
    .option('--hydrogen-scale <x>', 'pairs with hydrogen: limit = max(scale, x) times the sum of covalent radii; a factor, no unit', positive, CONTACTS_DEFAULTS.hydrogenScale)
    .option('--pair-limit <A-B=dist>', 'explicit limit for a species pair, distance in Å, e.g. O-H=0.8 (repeatable, or comma-separated)', pairLimit)
    .option('--max-per-frame <n>', 'violations listed per frame (all are counted)', count, CONTACTS_DEFAULTS.maxPerFrame)
    .option('--max-violations <n>', 'violations listed in total (all are counted)', count, CONTACTS_DEFAULTS.maxViolations)
    .option('--workers <n>', 'worker threads (default min(2, cpus))', count)
    .option('--json', 'print one JSON object')
    .action((files: string[], o) =>
      run('contacts', o.json, async () =>
        (await import('../gates/contacts.js')).checkContacts(files, {
          scale: o.scale,
          hydrogenScale: o.hydrogenScale,
          pairLimits: o.pairLimit,
          maxPerFrame: o.maxPerFrame,
          maxViolations: o.maxViolations,
          workers: o.workers,
        }),
      ),
    );

  const drift = check
    .command('drift')
    .description('total energy per atom against time: slope, spread, excursion, temperature; fails a run that blew up')
    .argument('<files...>', 'extended XYZ files or thermo tables (CSV or whitespace, header row), read as one run in order')
    .option('--format <kind>', 'auto, xyz or table (auto: .csv .tsv .dat .txt .log .thermo .out are tables)', oneOf('auto', 'xyz', 'table'), 'auto')
    .option('--timestep <fs>', 'MD time step: time = step x it, or frame index x it when frames carry no time or step', positive)
    .option('--dof <n>', 'degrees of freedom for the temperature (default 3N-3: centre-of-mass motion removed; 3 for one atom)', count)
    .option('--energy-source <s>', 'auto (total_energy if present, else energy + kinetic), total or kinetic', oneOf('auto', 'total', 'kinetic'), 'auto')
    .option('--total-key <key>', 'info key of the total energy (eV)', 'total_energy')
    .option('--energy-key <key>', 'info key of the potential energy (eV)', 'energy')
    .option('--velocities-key <key>', "per-atom velocities (Å/fs); 'momenta': ASE's momenta, converted (also used when a frame has no velocities)", 'velocities')
    .option('--time-key <key>', 'info key of the time (fs)', 'time')
    .option('--atoms <n>', 'thermo tables: number of atoms (1 if the energy column is per atom)', count)
    .option('--time-column <name>', 'thermo tables: time column (default time, time_fs or t)')
    .option('--step-column <name>', 'thermo tables: step column, used with --timestep')
    .option('--energy-column <name>', 'thermo tables: total energy column, eV (default total_energy, etot, toteng, etotal, e_tot)')
    .option('--temperature-column <name>', 'thermo tables: temperature column, K (default temperature or temp)')
    .option('--time-unit <unit>', 'thermo tables: unit of the time column, fs or ps', oneOf('fs', 'ps'), 'fs')
    .option('--drift-min-frames <n>', `fail with fewer usable frames (default ${DRIFT_DEFAULTS.minFrames}; campaign key drift_min_frames)`, count)
    .option('--drift-min-span <ps>', `fail when the run is shorter, ps (default ${DRIFT_DEFAULTS.minSpan}; campaign key drift_min_span)`, number)
    .option('--workers <n>', 'worker threads (default min(2, cpus))', count)
    .option('--json', 'print one JSON object');
  limitOptions(drift, DRIFT_LIMIT_NAMES);
  for (const old of Object.keys(RENAMED_DRIFT)) drift.addOption(new Option(`${old} <x>`).hideHelp());
  drift.action((files: string[], o) =>
    run('drift', o.json, async () => {
      refuseRenamed(o, RENAMED_DRIFT);
      return (await import('../gates/drift.js')).checkDrift(files, {
        format: o.format,
        timestep: o.timestep,
        dof: o.dof,
        source: o.energySource,
        totalKey: o.totalKey,
        energyKey: o.energyKey,
        velocitiesKey: o.velocitiesKey,
        timeKey: o.timeKey,
        atoms: o.atoms,
        timeColumn: o.timeColumn,
        stepColumn: o.stepColumn,
        energyColumn: o.energyColumn,
        temperatureColumn: o.temperatureColumn,
        timeUnit: o.timeUnit,
        limits: givenLimits(o, DRIFT_LIMIT_NAMES),
        limitName: limitFlag,
        minFrames: o.driftMinFrames,
        minSpan: o.driftMinSpan,
        workers: o.workers,
      });
    }),
  );

  const errors = check
    .command('errors')
    .description('energy and force errors of predictions against reference labels on the same frames')
    .argument('<reference>', 'extended XYZ with the reference energies and forces')
    .argument('<predicted>', 'extended XYZ with the predictions, same frames in the same order')
    .option('--ref-energy-key <key>', 'info key of the reference energy (eV)', 'energy')
    .option('--pred-energy-key <key>', 'info key of the predicted energy (eV)', 'energy')
    .option('--ref-forces-key <key>', 'per-atom reference forces (eV/Å)', 'forces')
    .option('--pred-forces-key <key>', 'per-atom predicted forces (eV/Å)', 'forces')
    .option('--position-tolerance <dist>', 'largest position difference between the files, Å', number, ERRORS_DEFAULTS.positionTolerance)
    .option('--ref-stress-key <key>', 'info key of the reference stress (eV/Å^3, 6 Voigt or 9 numbers)', 'stress')
    .option('--pred-stress-key <key>', 'info key of the predicted stress (eV/Å^3, 6 Voigt or 9 numbers)', 'stress')
    .option('--json', 'print one JSON object');
  limitOptions(errors, ERRORS_LIMIT_NAMES);
  errors.action((reference: string, predicted: string, o) =>
    run('errors', o.json, async () =>
      (await import('../gates/errors.js')).checkErrors(reference, predicted, {
        refEnergyKey: o.refEnergyKey,
        predEnergyKey: o.predEnergyKey,
        refForcesKey: o.refForcesKey,
        predForcesKey: o.predForcesKey,
        refStressKey: o.refStressKey,
        predStressKey: o.predStressKey,
        positionTolerance: o.positionTolerance,
        limits: givenLimits(o, ERRORS_LIMIT_NAMES),
        limitName: limitFlag,
      }),
    ),
  );

  check
    .command('committee')
    .description("committee force spread per frame and each frame's band (confident, informative, runaway)")
    .argument('<files...>', 'extended XYZ files with per-atom forces_0 ... forces_{M-1} (frames numbered across the files)')
    .option('--lower <spread>', 'lower edge of the informative window, eV/Å', number, COMMITTEE_DEFAULTS.lower)
    .option('--upper <spread>', 'upper edge of the informative window (runaway at or above), eV/Å', number, COMMITTEE_DEFAULTS.upper)
    .option('--prefix <name>', 'committee arrays are <prefix>0, <prefix>1, ...', COMMITTEE_DEFAULTS.prefix)
    .option('--models <m>', 'number of models M: every frame must carry exactly <prefix>0 ... <prefix>{M-1} (default: the highest <prefix>k of the first frame plus one)', count)
    .option('--max-runaway-fraction <x>', 'fail when more than this fraction of frames is runaway (0 to 1)', number, COMMITTEE_DEFAULTS.maxRunawayFraction)
    .option('--workers <n>', 'worker threads (default min(2, cpus))', count)
    .option('--json', 'print one JSON object')
    .action((files: string[], o) =>
      run('committee', o.json, async () =>
        (await import('../gates/committee.js')).checkCommittee(files, {
          lower: o.lower,
          upper: o.upper,
          prefix: o.prefix,
          models: o.models,
          maxRunawayFraction: o.maxRunawayFraction,
          workers: o.workers,
        }),
      ),
    );
}
