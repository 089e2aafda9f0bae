/**
 * `ratchet lineage`: a small campaign directory with real files, registered through the Journal the
 * way the engine does. File ids are checked against coreutils `sha256sum` (independent of our code);
 * the frame-selection file is written by ASE (python3-ase, an independent general library) with the
 * info keys source_artifact/source_frame, to show lineage reads what other tools write.
 */
import { describe, expect, it, beforeAll } from 'vitest';
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, renameSync, rmSync, writeFileSync, appendFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { Journal, acquireLock, artifactEvent, lockPath, ledgerPath } from '../../src/ledger/index.js';
import { LineageQueryError, lineageQuery, renderAnswer } from '../../src/ledger/query.js';

const ROOT = fileURLToPath(new URL('../../', import.meta.url));
const CAMPAIGN_SHA = 'c'.repeat(64);

function sha256sum(p: string): string {
  return 'sha256:' + execFileSync('sha256sum', ['-b', p], { encoding: 'utf8' }).split(' ')[0];
}

function cli(args: string[], cwd: string): { code: number | null; stdout: string; stderr: string } {
  const r = spawnSync(process.execPath, ['--import', join(ROOT, 'node_modules/tsx/dist/esm/index.mjs'), join(ROOT, 'src/cli/index.ts'), ...args], {
    cwd,
    encoding: 'utf8',
  });
  return { code: r.status, stdout: r.stdout, stderr: r.stderr };
}

const xyz = (comment: string): string => `2\n${comment} Lattice="6 0 0 0 6 0 0 0 6" Properties=species:S:1:pos:R:3 pbc="T T T"\nAr 0 0 0\nAr 3 3 3\n`;

let dir: string;
const ids: Record<string, string> = {};

beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'ratchet lineage ')); // a space in the path on purpose
  const w = (p: string, text: string): string => {
    mkdirSync(dirname(join(dir, p)), { recursive: true });
    writeFileSync(join(dir, p), text);
    return p;
  };
  const j = await Journal.open(dir, { log: () => undefined, handleSignals: false });
  const reg = async (key: string, path: string, role: string, inputs: string[], task?: string, command?: string): Promise<void> => {
    const e = await j.append(await artifactEvent({ campaignDir: dir, path, role, inputs, task, command, campaign_sha256: CAMPAIGN_SHA }));
    ids[key] = e.id as string;
    if (task) await j.append({ type: 'task_ended', task, attempt: 1, state: 'succeeded', exit_code: 0 });
  };
  await reg('start', w('structures/start.xyz', xyz('')), 'start', []);
  await reg('labeled', w('rounds/0/label/0000/labeled.xyz', xyz('energy=-0.1')), 'labeled', [ids.start], 'r0/label/0000', 'python dft.py');
  await reg('train', w('rounds/0/train/training_set.xyz', xyz('energy=-0.1 ')), 'training_set', [ids.labeled]);
  w('rounds/0/train/0000/model/weights.json', '{"seed":0}');
  await reg('model0', 'rounds/0/train/0000/model', 'model', [ids.train], 'r0/train/0000', 'python fit.py --seed 0');
  w('rounds/0/train/0001/model/weights.json', '{"seed":1}');
  await reg('model1', 'rounds/0/train/0001/model', 'model', [ids.train], 'r0/train/0001', 'python fit.py --seed 1');
  const traj = w('rounds/0/simulate/300K/trajectory.xyz', [0, 1, 2, 3, 4].map((t) => xyz(`time=${t}`)).join(''));
  await reg('traj', traj, 'trajectory', [ids.model0, ids.model1, ids.start], 'r0/simulate/300K', 'python md.py --T 300');
  // Frames 3 and 1 of the trajectory, selected and written by ASE with their source keys.
  const sel = join(dir, 'rounds/1/sample/0000/selected.xyz');
  mkdirSync(dirname(sel), { recursive: true });
  execFileSync('/usr/bin/python3', [
    '-c',
    `import sys, ase.io
frames = ase.io.read(sys.argv[1], ':')
out = []
for k in (3, 1):
    a = frames[k].copy()
    a.info = {'source_artifact': sys.argv[3], 'source_frame': k}
    out.append(a)
ase.io.write(sys.argv[2], out, format='extxyz')`,
    join(dir, traj),
    sel,
    ids.traj,
  ]);
  // Registered without frame_sources and without inputs: lineage must find the trajectory from the file.
  await reg('selected', 'rounds/1/sample/0000/selected.xyz', 'selected', [], 'r1/sample/0000', 'select --n 2');
  await j.close();
});

describe('lineageQuery', () => {
  it('hashes the path, finds its artifact and walks back to the start structures', async () => {
    const a = await lineageQuery({ target: 'rounds/0/simulate/300K/trajectory.xyz', cwd: dir });
    expect(a.artifact).toBe(sha256sum(join(dir, 'rounds/0/simulate/300K/trajectory.xyz')));
    expect(a.campaign).toBe(dir);
    expect(a.direction).toBe('upstream');
    const text = renderAnswer(a);
    const short = (k: string): string => ids[k].slice(7, 19);
    expect(text).toContain(`trajectory  ${short('traj')}  rounds/0/simulate/300K/trajectory.xyz\n│ task r0/simulate/300K: python md.py --T 300  (campaign cccccccccccc, ratchet `);
    expect(text).toContain(`├── model  ${short('model0')}  rounds/0/train/0000/model\n│   │ task r0/train/0000: python fit.py --seed 0`);
    expect(text).toContain(`training_set  ${short('train')}  rounds/0/train/training_set.xyz  (shown above)`);
    expect(text).toContain(`└── start  ${short('start')}  structures/start.xyz  (shown above)`);
    expect(text).toContain('given to the campaign (no producing task)');
  });

  it('finds the campaign by walking up from a path below it', async () => {
    const a = await lineageQuery({ target: 'model/weights.json', cwd: join(dir, 'rounds/0/train/0000') }).catch((e: Error) => e);
    // weights.json itself was never registered (its directory was): say so, exit 2.
    expect(a).toBeInstanceOf(LineageQueryError);
    expect((a as Error).message).toContain("this file's content is not recorded: it was modified after ratchet registered it, or never registered");
    expect((a as Error).message).not.toContain('registered:');
    const b = await lineageQuery({ target: '.', cwd: join(dir, 'rounds/0/train/0000/model') });
    expect(b.artifact).toBe(ids.model0);
  });

  it('lists the distinct source artifacts of a frame selection read from the file, and follows one frame', async () => {
    const a = await lineageQuery({ target: 'rounds/1/sample/0000/selected.xyz', cwd: dir, frame: 0 });
    expect(a.tree.children.map((c) => [c.id, c.relation])).toEqual([[ids.traj, 'frame_source']]);
    expect(a.frame!.end).toBe('origin');
    expect(a.frame!.steps.map((s) => [s.path, s.frame])).toEqual([
      ['rounds/1/sample/0000/selected.xyz', 0],
      ['rounds/0/simulate/300K/trajectory.xyz', 3],
    ]);
    const text = renderAnswer(a);
    expect(text).toContain('selected  ');
    expect(text).toContain('trajectory (frames from)');
    expect(text).toMatch(/frame 0 of selected .*\n {2}<- frame 3 of trajectory .*rounds\/0\/simulate\/300K\/trajectory\.xyz \(task r0\/simulate\/300K\)/);
  });

  it('resolves ids and unique prefixes, and refuses ambiguous or unknown ones', async () => {
    expect((await lineageQuery({ target: ids.labeled, cwd: dir })).artifact).toBe(ids.labeled);
    expect((await lineageQuery({ target: ids.labeled.slice(7, 17), cwd: dir })).artifact).toBe(ids.labeled);
    await expect(lineageQuery({ target: 'sha256:' + '0'.repeat(64), cwd: dir })).rejects.toThrow(/is not recorded in this campaign's ledger/);
    await expect(lineageQuery({ target: 'abcdef0123', cwd: dir })).rejects.toThrow(/no recorded artifact id starts with abcdef0123/);
    // Two ids sharing their first six digits (a hand-written ledger).
    const amb = mkdtempSync(join(tmpdir(), 'ratchet-ambiguous-'));
    mkdirSync(join(amb, '.ratchet'));
    const ev = (seq: number, hex: string): string =>
      JSON.stringify({ seq, at: '2024-01-01T00:00:00.000Z', type: 'artifact', id: 'sha256:' + hex, path: `f${seq}`, role: 'start', inputs: [], campaign_sha256: 'c', tool_version: '0' }) + '\n';
    writeFileSync(ledgerPath(amb), ev(1, 'abcdef' + '0'.repeat(58)) + ev(2, 'abcdef' + '1'.repeat(58)));
    await expect(lineageQuery({ target: 'abcdef', cwd: amb })).rejects.toThrow(/abcdef is ambiguous: it starts 2 artifact ids \(abcdef000000, abcdef111111\); give more digits/);
    expect((await lineageQuery({ target: 'abcdef1', cwd: amb })).tree.path).toBe('f2');
    rmSync(amb, { recursive: true });
  });

  it('says clearly when a registered file was modified afterwards', async () => {
    const p = join(dir, 'rounds/0/label/0000/labeled.xyz');
    const before = readFileSync(p);
    try {
      appendFileSync(p, '\n');
      const err = (await lineageQuery({ target: p, cwd: '/' }).catch((e: Error) => e)) as LineageQueryError;
      expect(err).toBeInstanceOf(LineageQueryError);
      expect(err.exitCode).toBe(2);
      expect(err.message).toContain(`${p}: this file's content is not recorded: it was modified after ratchet registered it, or never registered`);
      expect(err.message).toContain(`content now:  ${sha256sum(p)}`);
      expect(err.message).toContain(`registered:   ${ids.labeled} at this path`);
    } finally {
      writeFileSync(p, before);
    }
  });

  it('shows what was recorded at a path that no longer exists', async () => {
    const p = join(dir, 'rounds/0/train/training_set.xyz');
    renameSync(p, p + '.moved');
    try {
      const a = await lineageQuery({ target: p, cwd: dir });
      expect(a.artifact).toBe(ids.train);
      expect(a.notes.join('\n')).toMatch(/no longer exists/);
    } finally {
      renameSync(p + '.moved', p);
    }
  });

  it('needs a campaign directory', async () => {
    const elsewhere = mkdtempSync(join(tmpdir(), 'ratchet-nocampaign-'));
    writeFileSync(join(elsewhere, 'f.xyz'), 'x');
    await expect(lineageQuery({ target: 'f.xyz', cwd: elsewhere })).rejects.toThrow(/no \.ratchet\/ directory found here or above; pass --campaign DIR/);
    await expect(lineageQuery({ target: 'f.xyz', cwd: elsewhere, campaign: elsewhere })).rejects.toThrow(/not a campaign directory that has run/);
    rmSync(elsewhere, { recursive: true });
  });

  it('reads without taking the lock, while another writer holds it, and reports a torn tail', async () => {
    const lock = await acquireLock(dir, { handleSignals: false });
    const lockBefore = readFileSync(lockPath(dir), 'utf8');
    appendFileSync(ledgerPath(dir), '{"seq":999,"at":"2024');
    try {
      const a = await lineageQuery({ target: ids.model1, cwd: dir, down: true });
      expect(a.tree.children.map((c) => c.id)).toEqual([ids.traj]);
      expect(a.notes.join('\n')).toMatch(/last line \(line \d+\) is incomplete/);
      expect(readFileSync(lockPath(dir), 'utf8')).toBe(lockBefore);
    } finally {
      const text = readFileSync(ledgerPath(dir), 'utf8');
      writeFileSync(ledgerPath(dir), text.slice(0, text.lastIndexOf('\n') + 1));
      await lock.release();
    }
  });
});

describe('ratchet lineage (CLI)', () => {
  it('prints the tree, or one JSON object with --json, and exits 0', () => {
    const t = cli(['lineage', 'rounds/0/train/0001/model'], dir);
    expect(t.stderr).toBe('');
    expect(t.code).toBe(0);
    expect(t.stdout).toContain(`model  ${ids.model1.slice(7, 19)}  rounds/0/train/0001/model`);
    const j = cli(['lineage', 'rounds/0/train/0001/model', '--json', '--down'], dir);
    expect(j.code).toBe(0);
    const parsed = JSON.parse(j.stdout) as { artifact: string; direction: string; tree: { children: Array<{ path: string }> } };
    expect(parsed.artifact).toBe(ids.model1);
    expect(parsed.direction).toBe('downstream');
    expect(parsed.tree.children.map((c) => c.path)).toEqual(['rounds/0/simulate/300K/trajectory.xyz']);
  });

  it('exits 2 with a message when nothing is found', () => {
    // A relative path with --campaign is taken relative to the campaign when it is not there from here.
    const r = cli(['lineage', 'structures/nothing-here.xyz', '--campaign', dir], tmpdir());
    expect(r.code).toBe(2);
    expect(r.stdout).toBe('');
    expect(r.stderr).toMatch(/^ratchet: .*nothing-here\.xyz: no such file, and the ledger records nothing at structures\/nothing-here\.xyz\n$/);
  });
});
