/**
 * The commented starter campaign that `ratchet init DIR` writes: campaign.yaml plus a tiny starting
 * structure (silicon, the 8-atom diamond cubic cell) so that the campaign loads as written.
 */
import { mkdir, writeFile, access } from 'node:fs/promises';
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

# Exploration conditions: one simulate task per condition and round.
conditions:
  - name: solid-300K
    temperature: 300             # K
    steps: 2000                  # MD steps per round
    timestep: 1.0                # fs (about 0.5-2 fs with hydrogen present; heavier atoms allow more)
    write_every: 10              # keep a frame every 10 steps
    start: 0                     # index into start, or a path
    seed: 0                      # random seed (default: the condition's position in this list)
  - name: hot-1200K
    temperature: 1200
    steps: 2000
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
      max_per_condition: 50      # frames picked per condition per round
      fingerprint:
        cutoff: 6.0              # Å, per-species-pair distance histograms
        bins: 32

  # Every command runs with bash in its task directory and finds its inputs, parameters and the
  # outputs expected of it in task.json (path in $RATCHET_TASK_JSON; see also the RATCHET_* variables).
  label:
    command: python3 label.py    # edit: your reference calculation; writes energy (eV) and forces (eV/Å)
    frames_per_task: 20          # frames labeled per task
    max_force: 50                # eV/Å: a frame with any force component above this is rejected
    max_rejected_fraction: 0.1   # the stage fails when more frames than this are rejected
    contacts:
      scale: 0.5                 # a pair closer than 0.5 x (sum of covalent radii) is a contact violation
      min_distance: {}           # per-pair limits in Å, e.g. {"Si-Si": 1.5}
    setup:                       # shell lines run before the command
      - export OMP_NUM_THREADS=4
    resources:
      cpus: 4
      gpus: 0
      memory: 4G
      walltime: "02:00:00"
      # partition: compute
      # account: my-project
      # qos: normal
      extra_directives: []       # raw scheduler lines, copied as written
    attempts: 2                  # runs per task in all before the stage is blocked

  train:
    command: python3 train.py    # edit: trains one committee member (one task per member)
    params: {}                   # free parameters handed to the command in task.json
    resources:
      cpus: 4
      walltime: "04:00:00"

  validate:
    command: python3 validate.py # edit: committee predictions on held-out frames and a constant-energy run
    errors:
      energy_rmse: 10            # meV/atom
      force_rmse: 150            # meV/Å
      # energy_mae: 5            # meV/atom (checked only when given)
      # force_mae: 100           # meV/Å    (checked only when given)
    max_drift: 1.0               # meV/atom/ps, total energy drift of the constant-energy run
    nve_steps: 1000              # steps of the constant-energy run, per condition
    # nve_timestep: 1.0          # fs (default: each condition's time step)
    resources:
      cpus: 1
      walltime: "01:00:00"

  simulate:
    command: python3 md.py       # edit: MD driven by the committee, writing every member's forces
    contacts:
      scale: 0.5
    resources:
      cpus: 1
      walltime: "02:00:00"

backend:
  kind: local                    # local | slurm | pbs | lsf | sge
  # jobs: 2                      # local: tasks at once (default: CPU cores)
  # Cluster options:
  # max_array_size: 1000         # largest job array the site accepts
  # array_throttle: 50           # at most this many array elements running at once
  # poll_interval: 30            # seconds between scheduler polls
  # submit_retries: 3            # retries of a submit call that failed transiently
  # submit_timeout: 120          # seconds before a scheduler command counts as timed out
  # walltime_factor: 2           # a task killed at its walltime is resubmitted with twice the time...
  # walltime_max: "24:00:00"     # ...but never more than this
  # memory_factor: 1             # > 1: a task killed for memory is resubmitted with more memory...
  # memory_max: "64G"            # ...but never more than this
  # template_dir: templates      # your own batch-script templates

budget:
  # core_hours: 10000            # cap for the whole campaign (absent: no cap)
  # core_hours_per_round: 2000
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
  await mkdir(resolve(dir), { recursive: true });
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
