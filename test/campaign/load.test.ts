/**
 * Loading campaign files: the bad-input corpus (each case asserts the exact message, with file, line,
 * column and key path worked out by hand from the fixture text), and a good file.
 * The file hash is checked against coreutils `sha256sum` (independent of our code).
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { chmodSync, mkdirSync, mkdtempSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { CampaignError, loadCampaign, conditionStartPath, startPaths } from '../../src/campaign/load.js';

// Line numbers of GOOD, for reading the expected messages below:
//  1 name  2 species  3 start  4 conditions  5 - name  6 temperature  7 steps  8 stages  9 label
// 10 command  11 resources  12 walltime  13 train  14 command  15 validate  16 command  17 simulate  18 command
const GOOD = `name: argon
species: [Ar]
start: start.xyz
conditions:
  - name: c30
    temperature: 30
    steps: 100
stages:
  label:
    command: ./label.sh
    resources:
      walltime: "02:00:00"
  train:
    command: ./train.sh
  validate:
    command: ./validate.sh
  simulate:
    command: ./md.sh
`;

const XYZ = '1\nLattice="5.26 0 0 0 5.26 0 0 0 5.26" Properties=species:S:1:pos:R:3 pbc="T T T"\nAr 0 0 0\n';

let root: string;
let n = 0;
beforeAll(() => {
  root = mkdtempSync(join(tmpdir(), 'ratchet-campaign-'));
});
afterAll(() => {
  rmSync(root, { recursive: true, force: true });
});

/** A fresh campaign directory holding start.xyz and the given campaign text; returns the campaign file path. */
function campaignFile(text: string): string {
  const dir = join(root, `c${n++}`);
  mkdirSync(dir);
  writeFileSync(join(dir, 'start.xyz'), XYZ);
  const file = join(dir, 'campaign.yaml');
  writeFileSync(file, text);
  return file;
}

function edit(from: string, to: string): string {
  if (!GOOD.includes(from)) throw new Error(`fixture has no ${JSON.stringify(from)}`);
  return GOOD.replace(from, to);
}

async function failure(text: string): Promise<{ file: string; error: CampaignError }> {
  const file = campaignFile(text);
  const before = readdirSync(join(file, '..')).sort();
  try {
    await loadCampaign(file);
  } catch (err) {
    expect(err).toBeInstanceOf(CampaignError);
    // Loading never writes: the campaign directory is as it was.
    expect(readdirSync(join(file, '..')).sort()).toEqual(before);
    return { file, error: err as CampaignError };
  }
  throw new Error('expected the campaign to be rejected');
}

async function message(text: string): Promise<string> {
  const { file, error } = await failure(text);
  return error.message.split(file).join('campaign.yaml');
}

describe('a good campaign', () => {
  it('loads, with the directory and the sha256 of the file bytes', async () => {
    const file = campaignFile(GOOD);
    const loaded = await loadCampaign(file);
    expect(loaded.campaign.name).toBe('argon');
    expect(loaded.dir).toBe(join(file, '..'));
    expect(loaded.file).toBe(file);
    const expected = execFileSync('sha256sum', ['-b', file], { encoding: 'utf8' }).split(' ')[0];
    expect(loaded.sha256).toBe(expected);
    expect(startPaths(loaded.campaign, loaded.dir)).toEqual([join(loaded.dir, 'start.xyz')]);
    expect(conditionStartPath(loaded.campaign, loaded.dir, loaded.campaign.conditions[0]!)).toBe(join(loaded.dir, 'start.xyz'));
  });

  it('reads an empty section (only comments under it) as its defaults', async () => {
    const file = campaignFile(GOOD + 'backend:\n  # kind: slurm\nbudget:\n');
    const loaded = await loadCampaign(file);
    expect(loaded.campaign.backend.kind).toBe('local');
    expect(loaded.campaign.budget).toEqual({});
  });
});

describe('bad-input corpus', () => {
  it('wrong type', async () => {
    expect(await message(edit('    temperature: 30', '    temperature: warm'))).toBe(
      'campaign.yaml:6:18: conditions[0].temperature: expected a temperature in K above 0, found "warm"',
    );
    expect(await message(edit('species: [Ar]', 'species: Ar'))).toBe(
      'campaign.yaml:2:10: species: expected a list of element symbols like [Si, O], found "Ar"',
    );
    expect(await message(edit('  label:\n', '  label:\n    frames_per_task: [10]\n'))).toBe(
      'campaign.yaml:10:22: stages.label.frames_per_task: expected a whole number of frames of at least 1, found a list',
    );
  });

  it('unknown key with the nearest valid key', async () => {
    const { error } = await failure(edit('    command: ./label.sh\n', '    command: ./label.sh\n    frame_per_task: 10\n'));
    expect(error.message.split(error.file).join('campaign.yaml')).toBe(
      "campaign.yaml:11:5: stages.label.frame_per_task: unknown key; did you mean 'frames_per_task'?",
    );
    expect(error).toMatchObject({ line: 11, column: 5, keyPath: 'stages.label.frame_per_task', suggestion: 'frames_per_task' });
    expect(await message(edit('    temperature: 30', '    temprature: 30'))).toBe(
      "campaign.yaml:6:5: conditions[0].temprature: unknown key; did you mean 'temperature'?",
    );
  });

  it('unknown key that belongs in another section, and one that is nowhere', async () => {
    expect(await message(edit('    command: ./train.sh\n', '    command: ./train.sh\n    frames_per_task: 10\n'))).toBe(
      "campaign.yaml:15:5: stages.train.frames_per_task: unknown key here; 'frames_per_task' belongs under stages.label",
    );
    expect(await message(edit('  train:\n', '  train:\n    holdout: 0.2\n'))).toBe(
      "campaign.yaml:14:5: stages.train.holdout: unknown key here; 'holdout' belongs under the top level",
    );
    expect(await message(edit('  train:\n', '  train:\n    colour: blue\n'))).toBe(
      'campaign.yaml:14:5: stages.train.colour: unknown key; expected one of: command, resources, setup, attempts, params, programs',
    );
  });

  it('missing command', async () => {
    expect(await message(edit('    command: ./train.sh\n', ''))).toBe(
      'campaign.yaml:13:3: stages.train.command: missing; expected a command line (a non-empty string) for the train tasks',
    );
    expect(await message(edit('    command: ./train.sh\n', '    resources: {cpus: 2}\n'))).toBe(
      'campaign.yaml:13:3: stages.train.command: missing; expected a command line (a non-empty string) for the train tasks',
    );
    expect(await message(edit('    command: ./md.sh\n', '    command: ""\n'))).toBe(
      'campaign.yaml:18:14: stages.simulate.command: expected a command line (a non-empty string) for the simulate tasks, found ""',
    );
  });

  it('negative walltime', async () => {
    const expected = 'expected a walltime like "02:00:00" (HH:MM:SS) or "1-12:00:00" (D-HH:MM:SS), or whole seconds';
    expect(await message(edit('walltime: "02:00:00"', 'walltime: "-1"'))).toBe(
      `campaign.yaml:12:17: stages.label.resources.walltime: ${expected}, found "-1"`,
    );
    expect(await message(edit('walltime: "02:00:00"', 'walltime: -3600'))).toBe(
      `campaign.yaml:12:17: stages.label.resources.walltime: ${expected}, found -3600`,
    );
    expect(await message(edit('walltime: "02:00:00"', 'walltime: "-02:00:00"'))).toBe(
      `campaign.yaml:12:17: stages.label.resources.walltime: ${expected}, found "-02:00:00"`,
    );
  });

  it('YAML syntax errors', async () => {
    expect(await message(edit('species: [Ar]', 'species: [Ar'))).toBe(
      'campaign.yaml:3:1: YAML syntax: Flow sequence in block collection must be sufficiently indented and end with a ]',
    );
    expect(await message(edit('    steps: 100', '\tsteps: 100'))).toBe('campaign.yaml:7:1: YAML syntax: Tabs are not allowed as indentation');
    expect(await message(edit('name: argon', 'name: "argon'))).toBe('campaign.yaml:1:13: YAML syntax: Missing closing "quote');
    expect(await message(GOOD + 'name: again\n')).toBe("campaign.yaml:19:1: YAML syntax: Map keys must be unique ('name' appears twice)");
  });

  it('missing or unreadable starting structures', async () => {
    const { file, error } = await failure(edit('start: start.xyz', 'start: missing.xyz'));
    const dir = join(file, '..');
    expect(error.message).toBe(
      `${file}:3:8: start: cannot read starting structure "missing.xyz" (${join(dir, 'missing.xyz')}): no such file or directory`,
    );
    expect(error).toMatchObject({ file, line: 3, column: 8, keyPath: 'start' });

    const dirCase = await failure(edit('start: start.xyz', 'start: [start.xyz, structures]'));
    mkdirSync(join(dirCase.file, '..', 'structures'));
    await expect(loadCampaign(dirCase.file)).rejects.toThrow(
      `${dirCase.file}:3:20: start[1]: cannot read starting structure "structures" (${join(dirCase.file, '..', 'structures')}): it is a directory, expected a file`,
    );

    expect(await message(edit('start: start.xyz', 'start: start.xyz/inner.xyz'))).toMatch(
      /^campaign\.yaml:3:8: start: cannot read starting structure "start\.xyz\/inner\.xyz" \(.*\): a part of the path is not a directory$/,
    );

    expect(await message(edit('    steps: 100\n', '    steps: 100\n    start: hot/start.xyz\n'))).toMatch(
      /^campaign\.yaml:8:12: conditions\[0\]\.start: cannot read starting structure "hot\/start\.xyz" \(.*\/hot\/start\.xyz\): no such file or directory$/,
    );
  });

  it('starting structures that are not extended XYZ, empty, or of other species', async () => {
    const write = (file: string, name: string, text: string) => writeFileSync(join(file, '..', name), text);

    const notXyz = await failure(edit('start: start.xyz', 'start: [start.xyz, notes.txt]'));
    write(notXyz.file, 'notes.txt', 'these are my notes\n');
    await expect(loadCampaign(notXyz.file)).rejects.toThrow(
      `${notXyz.file}:3:20: start[1]: cannot read starting structure "notes.txt": ${join(notXyz.file, '..', 'notes.txt')}:1: expected the atom count of frame 0 (a non-negative integer alone on its line), found "these are my notes"`,
    );

    const empty = await failure(edit('start: start.xyz', 'start: empty.xyz'));
    write(empty.file, 'empty.xyz', '');
    await expect(loadCampaign(empty.file)).rejects.toThrow(
      `${empty.file}:3:8: start: expected at least one frame in starting structure "empty.xyz", found an empty file`,
    );

    // Second frame holds copper, which the campaign does not list.
    const other = await failure(edit('start: start.xyz', 'start: mixed.xyz'));
    write(other.file, 'mixed.xyz', XYZ + '2\nProperties=species:S:1:pos:R:3\nAr 0 0 0\nCu 2 0 0\n');
    await expect(loadCampaign(other.file)).rejects.toThrow(
      `${other.file}:3:8: start: expected structures of the campaign's species (Ar), found "Cu" in frame 1 of "mixed.xyz"`,
    );
  });

  // Permission bits do not stop root, so this case runs only for an ordinary user.
  it.skipIf(process.getuid?.() === 0)('starting structure without read permission', async () => {
    const file = campaignFile(GOOD);
    chmodSync(join(file, '..', 'start.xyz'), 0o000);
    await expect(loadCampaign(file)).rejects.toThrow(/^.*:3:8: start: cannot read starting structure "start\.xyz" \(.*\): permission denied$/);
  });

  it('bad species symbol', async () => {
    expect(await message(edit('species: [Ar]', 'species: [Ar, Xx]'))).toBe(
      'campaign.yaml:2:15: species[1]: expected an element symbol like "Ar", found "Xx"',
    );
    const { error } = await failure(edit('species: [Ar]', 'species: [ar]'));
    expect(error.detail).toBe(`expected an element symbol like "Ar", found "ar"; did you mean 'Ar'?`);
    expect(error.suggestion).toBe('Ar');
    expect(await message(edit('species: [Ar]', 'species: [Ar, Ar]'))).toBe(
      'campaign.yaml:2:15: species[1]: expected each element once ("Ar" is also species[0]), found "Ar"',
    );
  });

  it('a choice with a typo', async () => {
    expect(await message(GOOD + 'backend:\n  kind: slurn\n')).toBe(
      `campaign.yaml:20:9: backend.kind: expected one of "local", "slurm", "pbs", "lsf", "sge", found "slurn"; did you mean 'slurm'?`,
    );
  });

  it('bad parameter names and contact pairs name the key', async () => {
    expect(await message(edit('    command: ./md.sh\n', '    command: ./md.sh\n    params: {"cut-off": 5}\n'))).toBe(
      'campaign.yaml:19:14: stages.simulate.params["cut-off"]: expected a parameter name of letters, digits and underscores, found the key "cut-off"',
    );
    expect(await message(edit('    command: ./md.sh\n', '    command: ./md.sh\n    contacts:\n      min_distance: {Ar-Ne: 2.0}\n'))).toBe(
      `campaign.yaml:20:22: stages.simulate.contacts.min_distance["Ar-Ne"]: expected a pair of the campaign's species (Ar), found "Ar-Ne" ("Ne" is not one of them)`,
    );
  });

  it('a file that is empty, not a mapping, or missing', async () => {
    expect(await message('')).toBe('campaign.yaml:1:1: expected a mapping of campaign settings (key: value lines), found an empty file');
    expect(await message('- a\n- b\n')).toBe('campaign.yaml:1:1: expected a mapping of campaign settings (key: value lines), found a list');
    await expect(loadCampaign(join(root, 'nowhere', 'campaign.yaml'))).rejects.toThrow(
      `${join(root, 'nowhere', 'campaign.yaml')}: cannot read the campaign file: no such file or directory`,
    );
  });

  it('reports every problem, in file order', async () => {
    const text = edit('species: [Ar]', 'species: [Ar, Qq]').replace('    steps: 100', '    steps: -4').replace('  train:\n', '  train:\n    cpus: 2\n');
    expect(await message(text)).toBe(
      [
        'campaign.yaml:2:15: species[1]: expected an element symbol like "Ar", found "Qq"',
        'campaign.yaml:7:12: conditions[0].steps: expected a whole number of steps of at least 1, found -4',
        "campaign.yaml:14:5: stages.train.cpus: unknown key here; 'cpus' belongs under stages.sample.resources or stages.label.resources or stages.train.resources or stages.validate.resources or stages.simulate.resources",
      ].join('\n'),
    );
  });
});
