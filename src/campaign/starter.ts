/**
 * The commented starter campaign that `ratchet init DIR` writes: campaign.yaml plus a tiny starting
 * structure (silicon, the 8-atom diamond cubic cell) so that the campaign loads as written.
 */
import { writeFile, access } from 'node:fs/promises';
import { ensureTargetDir, TargetDirError } from './target-dir.js';
import { join, resolve } from 'node:path';

export const STARTER_CAMPAIGN_FILE = 'campaign.yaml';
export const STARTER_STRUCTURE_FILE = 'start.xyz';

/** Silicon lattice constant in Å (design notes: "silicon 5.431 Å"). */
const A_SI = 5.431;

/** The 8-atom conventional diamond cubic cell of silicon as extended XYZ. */
export function starterStructure(): string {
  // Fractional positions of the diamond structure: fcc (0,0,0)+face centres, plus the same shifted by (1/4,1/4,1/4).
  const fractional = [
    [0, 0, 0], [0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0],
    [0.25, 0.25, 0.25], [0.25, 0.75, 0.75], [0.75, 0.25, 0.75], [0.75, 0.75, 0.25],
  ];
  const fmt = (x: number) => (x * A_SI).toFixed(8);
  const lines = [
    String(fractional.length),
    `Lattice="${A_SI} 0.0 0.0 0.0 ${A_SI} 0.0 0.0 0.0 ${A_SI}" Properties=species:S:1:pos:R:3 pbc="T T T"`,
    ...fractional.map(([x, y, z]) => `Si ${fmt(x!)} ${fmt(y!)} ${fmt(z!)}`),
  ];
  return lines.join('\n') + '\n';
}

/** The starter campaign, every section commented, valid as written. */
export const STARTER_CAMPAIGN = `# A ratchet campaign: one file that describes the whole active-learning loop for one system.
# Each round runs five stages in order: sample -> label -> train -> validate -> simulate.
#
# Units: distances Å, forces eV/Å, energies eV (error limits in meV as named), temperatures K,
# pressures bar, MD time steps fs, walltimes "HH:MM:SS" or "D-HH:MM:SS", memory "4G" / "500M".
# Paths are relative to this file. Values shown are the defaults unless marked "edit".
#
# Editors: \`ratchet schema > campaign.schema.json\` writes a JSON Schema; many YAML editors use it
# through a first line such as:  # yaml-language-server: $schema=campaign.schema.json
#
# Resource requests and budgets below are placeholders: follow your site's policy for partitions,
# accounts, walltimes and core-hours before running on a shared cluster.

name: silicon-starter            # edit: a name for this campaign
species: [Si]                    # edit: element symbols of the system
start: ${STARTER_STRUCTURE_FILE}                 # edit: starting structure(s), extended XYZ (one path or a list)

committee:
  size: 4                        # models trained with different seeds; their force spread estimates the error
  bootstrap: false               # true: each model trains on a bootstrap resample of the training set
  seed: 0

holdout: 0.1                     # share of labeled frames kept for testing (chosen by content hash: stable across rounds)

rounds:
  max: 10                        # stop as "exhausted" after this many rounds
  converge:
    confident_fraction: 0.99     # converged when every condition reaches this confident fraction, no runaway frames
  explore_unvalidated:
    max_rounds: 0                # >0: a round whose validation fails may still explore and label (never converging)
    steps_fraction: 0.1          # share of each condition's steps run in such a round

# Exploration conditions: one simulate task per condition and round.
conditions:
  - name: solid-300K              # edit: a name for the condition (it names the simulate task)
    temperature: 300             # edit: K
    steps: 2000                  # edit: MD steps per round
    timestep: 1.0                # fs (about 0.5-2 fs with hydrogen present; heavier atoms allow more)
    write_every: 10              # keep a frame every 10 steps
    start: 0                     # index into start, or a path
    seed: 0                      # random seed (default: the condition's position in this list)
  - name: hot-1200K               # edit
    temperature: 1200            # edit
    steps: 2000                  # edit
    timestep: 1.0
  # - name: compressed
  #   temperature: 600
  #   pressure: 50000            # bar (1 GPa = 10000 bar); absent: constant volume
  #   steps: 2000

stages:
  sample:
    # Built in: round 0 perturbs the starting structures, later rounds pick frames the committee
    # disagrees on from the last trajectories. Give a command only to replace this with your own program.
    perturb:
      count: 10                  # perturbed frames per starting structure in round 0
      displacement: 0.05         # Å, standard deviation of each random displacement component
      strain: 0.02               # largest random cell strain component (2 %)
      seed: 0
    select:
      window:
        lower: 0.05              # eV/Å: committee spread below this is "confident"
        upper: 0.5               # eV/Å: at or above this is "runaway" (never labeled)
        calibrate: false         # true: divide lower/upper by the measured ratio of true error to spread
      max_per_condition: 50      # frames picked per condition per round
      fingerprint:
        cutoff: 6.0              # Å, per-species-pair distance histograms
        bins: 32

  # Every command runs with bash in its task directory and finds its inputs, parameters and the
  # outputs expected of it in task.json (path in $RATCHET_TASK_JSON; see also the RATCHET_* variables).
  # Programs kept beside this file are named through $RATCHET_CAMPAIGN_DIR (this file's folder), as
  # below; list them under programs so the ledger records the sha256 of the version each task ran.
  label:
    command: python3 "$RATCHET_CAMPAIGN_DIR/label.py"    # edit: your reference calculation; writes energy (eV) and forces (eV/Å)
    # programs: [label.py]       # edit: files or folders the command runs, relative to this file (each must exist)
    frames_per_task: 20          # frames labeled per task
    max_force: 50                # eV/Å: a frame with any force component above this is rejected
    max_rejected_fraction: 0.1   # the stage fails when more frames than this are rejected
    contacts:
      scale: 0.5                 # a pair closer than 0.5 x (sum of covalent radii) is a contact violation
      # hydrogen_scale: 0.7      # pairs with hydrogen use max(scale, hydrogen_scale) x (sum of covalent radii)
      min_distance: {}           # per-pair limits in Å, e.g. {"Si-Si": 1.5}
    setup:                       # shell lines run before the command
      - export OMP_NUM_THREADS=4 # edit (default: no set-up lines)
    resources:
      cpus: 4                    # edit (default: 1)
      gpus: 0
      memory: 4G                 # edit (default: the site's)
      walltime: "02:00:00"       # edit (default: "01:00:00")
      # partition: compute       # edit
      # account: my-project      # edit
      # qos: normal              # edit
      scheduler_lines: []        # raw scheduler lines, copied as written
    attempts: 2                  # runs per task in all before the stage is blocked

  train:
    command: python3 "$RATCHET_CAMPAIGN_DIR/train.py"    # edit: trains one committee member (one task per member)
    # programs: [train.py]       # edit
    params: {}                   # free parameters handed to the command in task.json
    resources:
      cpus: 4                    # edit (default: 1)
      walltime: "04:00:00"       # edit (default: "01:00:00")

  validate:
    command: python3 "$RATCHET_CAMPAIGN_DIR/validate.py"    # edit: committee predictions on held-out frames and a constant-energy run
    # Gate limits: a number is the fail limit, or give {warn: x, fail: y}; the same names and defaults as
    # \`ratchet check errors|drift\` (--force-rmse-warn, --force-rmse-fail ...).
    errors:
      energy_rmse: {warn: 5, fail: 10}     # meV/atom
      force_rmse: {warn: 100, fail: 150}   # meV/Å, overall and for each element
      # energy_mae: 5            # meV/atom (checked only when given)
      # force_mae: 100           # meV/Å, overall and per element (checked only when given)
      # stress_rmse: 0.5         # GPa, 6 Voigt components, frames with stress in both files (checked only when given)
    max_drift: {warn: 0.1, fail: 1}      # meV/atom/ps, |slope| of total energy in the constant-energy run (warns only beyond 2 standard errors)
    max_excursion: {warn: 10, fail: 100} # meV/atom, largest |E(t) - E(0)| of that run
    drift_min_frames: 10         # fewer frames in the constant-energy run fail the drift gate
    drift_min_span: 1            # ps; a shorter constant-energy run fails the drift gate
    nve_steps: 1000              # steps of the constant-energy run, per condition
    # nve_timestep: 1.0          # fs (default: each condition's time step)
    resources:
      cpus: 1
      walltime: "01:00:00"

  simulate:
    command: python3 "$RATCHET_CAMPAIGN_DIR/md.py"    # edit: MD driven by the committee, writing every member's forces
    contacts:
      scale: 0.5
    resources:
      cpus: 1
      walltime: "02:00:00"       # edit (default: "01:00:00")

backend:
  kind: local                    # local | slurm | pbs | lsf | sge
  # jobs: 2                      # local: tasks at once (default: CPU cores)
  # Cluster options:
  # max_array_size: 1000         # largest job array the site accepts
  # array_throttle: 50           # edit: at most this many array elements running at once (default: no limit)
  # poll_interval: 30            # seconds between scheduler polls
  # submit_retries: 3            # retries of a submit call that failed transiently
  # submit_timeout: 120          # seconds before a scheduler command counts as timed out
  # walltime_factor: 2           # a task killed at its walltime is resubmitted with twice the time...
  # walltime_max: "24:00:00"     # edit: ...but never more than this (default: no maximum)
  # memory_factor: 1             # > 1: a task killed for memory is resubmitted with more memory...
  # memory_max: "64G"            # edit: ...but never more than this (default: no maximum)
  # template_dir: templates      # edit: your own batch-script templates (default: the built-in ones)

budget:
  # core_hours: 10000            # edit: cap for the whole campaign (absent: no cap)
  # core_hours_per_round: 2000   # edit: cap for one round (absent: no cap)
`;

/** Thrown when `ratchet init` would overwrite a file. */
export class InitError extends Error {
  override name = 'InitError';
}

/**
 * Write the starter campaign and its starting structure into `dir` (created when missing).
 * Refuses, writing nothing, when either file already exists. Returns the paths written.
 */
export async function writeStarter(dir: string): Promise<{ campaign: string; structure: string }> {
  const campaign = resolve(join(dir, STARTER_CAMPAIGN_FILE));
  const structure = resolve(join(dir, STARTER_STRUCTURE_FILE));
  for (const path of [campaign, structure]) {
    if (await exists(path)) throw new InitError(`${path}: already exists; not overwriting it (choose another directory or move the file)`);
  }
  // Checked and created one component at a time: a file in the way, /proc, an unwritable place are refused at once.
  await ensureTargetDir(dir).catch((err: unknown) => {
    throw err instanceof TargetDirError ? new InitError(err.message) : err;
  });
  // 'wx' fails if the file appeared in the meantime, so nothing is ever overwritten.
  await writeFile(structure, starterStructure(), { flag: 'wx' });
  await writeFile(campaign, STARTER_CAMPAIGN, { flag: 'wx' });
  return { campaign, structure };
}

async function exists(path: string): Promise<boolean> {
  try {
    await access(path);
    return true;
  } catch {
    return false;
  }
}
