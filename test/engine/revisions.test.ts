/**
 * Campaign revisions through the engine, with the invented stage programs of fake-stage.mjs: a campaign
 * edited after round 0 records a new revision; a change that acts on the future only goes on with a note;
 * a change to the label command's parameters stops the run until a person accepts it or asks for the
 * earlier frames to be labeled again.
 *
 * Independent checks: the kept copy of each revision is hashed with coreutils' sha256sum; the changed key
 * paths are compared with a plain recursive diff of the raw YAML done by PyYAML (Debian's python3-yaml,
 * through /usr/bin/python3); frames are counted and compared by ASE's extended XYZ reader (python3-ase).
 */
import { execFileSync } from 'node:child_process';
import { readFileSync, readdirSync, writeFileSync } from 'node:fs';
import { userInfo } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { affectsData, diffCampaigns } from '../../src/campaign/diff.js';
import { parseCampaignText } from '../../src/campaign/load.js';
import { BufferOutput } from '../../src/engine/output.js';
import { revisionsCommand } from '../../src/engine/revisions.js';
import { runCampaign } from '../../src/engine/run.js';
import { campaignStatus, formatStatus } from '../../src/engine/status.js';
import type { LedgerEvent } from '../../src/ledger/journal.js';
import { collectReport } from '../../src/report/data.js';
import { campaignYaml, cliArgs, ledgerEvents, makeCampaign, removeCampaigns, REPO } from './fixture.js';

afterAll(removeCampaigns);

const PY = '/usr/bin/python3';

/** The fixture campaign with a third condition. */
function withCondition(yaml: string): string {
  const added = yaml.replace('\nstages:\n', '\n  - name: mild\n    temperature: 60\n    steps: 10\n    write_every: 1\nstages:\n');
  expect(added).not.toBe(yaml);
  return added;
}

/** Changed key paths of two raw YAML texts, by an independent recursive diff in Python (PyYAML). */
function pythonPaths(a: string, b: string): string[] {
  const py = `
import sys, json, yaml
def walk(a, b, p, out):
    if a == b: return
    if isinstance(a, dict) and isinstance(b, dict):
        for k in list(a) + [k for k in b if k not in a]:
            walk(a.get(k), b.get(k), p + ('.' if p else '') + k, out)
    elif isinstance(a, list) and isinstance(b, list):
        for i in range(max(len(a), len(b))):
            walk(a[i] if i < len(a) else None, b[i] if i < len(b) else None, p + '[%d]' % i, out)
    else:
        out.append(p)
out = []
walk(yaml.safe_load(open(sys.argv[1])), yaml.safe_load(open(sys.argv[2])), '', out)
print(json.dumps(out))
`;
  const dir = execFileSync('mktemp', ['-d'], { encoding: 'utf8' }).trim();
  writeFileSync(join(dir, 'a.yaml'), a);
  writeFileSync(join(dir, 'b.yaml'), b);
  return JSON.parse(execFileSync(PY, ['-c', py, join(dir, 'a.yaml'), join(dir, 'b.yaml')], { encoding: 'utf8' }));
}

/** Frames per file and their positions, read by ASE; `energy` tells whether a frame carries one. */
function aseFrames(files: string[]): { file: string; positions: number[][]; energy: boolean }[] {
  const py = `
import sys, json, ase.io
out = []
for p in sys.argv[1:]:
    for a in ase.io.read(p, index=':', format='extxyz'):
        e = 'energy' in a.info or (a.calc is not None and 'energy' in a.calc.results)
        out.append({'file': p, 'positions': a.get_positions().tolist(), 'energy': e})
print(json.dumps(out))
`;
  return JSON.parse(execFileSync(PY, ['-c', py, ...files], { encoding: 'utf8', maxBuffer: 1 << 26 }));
}

const sha256sum = (p: string): string => execFileSync('sha256sum', [p], { encoding: 'utf8' }).split(' ')[0];

/** Run to the end of round 0 (stop before round 1). */
async function roundZero(c: { file: string }): Promise<void> {
  const out = new BufferOutput();
  const r = await runCampaign({ campaign: c.file, out, stopBefore: '1', error: (m) => out.line(`error: ${m}`) });
  expect(r.exitCode, out.text).toBe(0);
}

describe('the diff of two parsed campaigns', () => {
  it('names an added condition and a new label parameter by key path, as a plain diff of the raw YAML does', () => {
    const base = campaignYaml({ maxRounds: 3 });
    const withParams = campaignYaml({ maxRounds: 3, labelParams: { basis: 'small' } });
    for (const [x, y] of [
      [base, withCondition(base)],
      [withParams, campaignYaml({ maxRounds: 3, labelParams: { basis: 'small', smearing: 0.01 } })],
      [withParams, campaignYaml({ maxRounds: 3, labelParams: { basis: 'large' } })],
    ]) {
      const d = diffCampaigns(parseCampaignText(x, 'a.yaml').campaign, parseCampaignText(y, 'b.yaml').campaign);
      // Defaults are filled on both sides, so only what the edit changed differs.
      expect(d.map((c) => c.path)).toEqual(pythonPaths(x, y));
      expect(d).toHaveLength(1);
    }
    const d = diffCampaigns(parseCampaignText(base, 'a.yaml').campaign, parseCampaignText(withCondition(base), 'b.yaml').campaign);
    expect(d).toHaveLength(1);
    expect(d[0]).not.toHaveProperty('old');
    expect(d[0].new).toMatchObject({ name: 'mild', temperature: 60 });
  });

  it('sorts changes into those that affect data already made and those that act on the future', () => {
    for (const p of ['stages.label.command', 'stages.label.params.smearing', 'stages.label.setup[0]', 'stages.label.programs[1]', 'species[1]', 'holdout', 'stages.simulate.contacts.scale', 'stages.label.contacts.min_distance["O-H"]'])
      expect(affectsData(p), p).toBe(true);
    for (const p of ['conditions[2]', 'rounds.max', 'committee.size', 'stages.label.resources.walltime', 'backend.jobs', 'stages.sample.select.max_per_condition', 'stages.label.frames_per_task', 'holdouts'])
      expect(affectsData(p), p).toBe(false);
  });
});

describe('a condition added after round 0', () => {
  const c = makeCampaign({ maxRounds: 3 });
  const out = new BufferOutput();
  let exitCode = -1;
  let events: Record<string, any>[] = [];
  let firstText = '';
  let secondText = '';

  beforeAll(async () => {
    await roundZero(c);
    firstText = readFileSync(c.file, 'utf8');
    secondText = withCondition(firstText);
    writeFileSync(c.file, secondText);
    const r = await runCampaign({ campaign: c.file, out, error: (m) => out.line(`error: ${m}`) });
    exitCode = r.exitCode;
    events = ledgerEvents(c.dir);
  }, 240_000);

  it('goes on with a one-line note and records both revisions, each kept byte for byte', () => {
    expect(exitCode, out.text).toBe(0);
    const revs = events.filter((e) => e.type === 'campaign_revision');
    expect(revs.map((e) => e.number)).toEqual([1, 2]);
    expect(revs[0].changes).toEqual([]);
    expect(revs[1]).toMatchObject({ previous: revs[0].sha256, affects_data: [], round: 1 });
    expect(revs[1].changes.map((k: { path: string }) => k.path)).toEqual(['conditions[2]']);
    expect(revs[1]).not.toHaveProperty('decision_needed');
    expect(events.some((e) => e.type === 'revision_decided')).toBe(false);
    expect(out.text).toMatch(new RegExp(`campaign revision 2 \\(${revs[1].sha256.slice(0, 12)}\\) from round 1: 1 change\\(s\\): conditions\\[2\\]`));
    // Each revision is kept as the file's bytes, under its sha256 (checked with coreutils' sha256sum).
    for (const [rev, text] of [
      [revs[0], firstText],
      [revs[1], secondText],
    ] as const) {
      const kept = join(c.dir, '.ratchet/revisions', `${rev.sha256}.yaml`);
      expect(readFileSync(kept, 'utf8')).toBe(text);
      expect(sha256sum(kept)).toBe(rev.sha256);
    }
    expect(sha256sum(c.file)).toBe(revs[1].sha256);
    // The revision event comes before the run that it belongs to.
    const i = events.indexOf(revs[1]);
    expect(events[i + 1].type).toBe('run_started');
    // Round 1 simulates the new condition.
    const sim = events.find((e) => e.type === 'stage_planned' && e.round === 1 && e.stage === 'simulate');
    expect(sim!.tasks).toContain('mild');
  });

  it('status shows the two revisions and which rounds ran under which', async () => {
    const s = await campaignStatus(c.file, () => undefined);
    const r = s.report!;
    expect(r.revisions!.map((v) => [v.number, v.round, v.changes])).toEqual([
      [1, 0, 0],
      [2, 1, 1],
    ]);
    expect(r.rounds[0].revision).toBe(1);
    expect(r.rounds[1].revision).toBe(2);
    expect(r.rounds.slice(2).every((rr) => rr.revision === 2)).toBe(true);
    const text = new BufferOutput();
    formatStatus(r, text);
    expect(text.text).toContain('campaign revisions');
    expect(text.text).toMatch(/ 1\s+[0-9a-f]{12}\s+from r0, 0 change\(s\); rounds r0\n/);
    expect(text.text).toMatch(/ 2\s+[0-9a-f]{12}\s+from r1, 1 change\(s\); rounds r1/);
    // The report's data carry the same list, with the rounds that ran under each revision.
    const data = await collectReport(r, events as unknown as LedgerEvent[]);
    expect(data.revisions!.map((v) => [v.number, v.rounds[0]])).toEqual([
      [1, 0],
      [2, 1],
    ]);
  });
});

describe('a changed label command after round 0', () => {
  const acc = makeCampaign({ maxRounds: 3 });
  const rel = makeCampaign({ maxRounds: 3 });
  const edited = campaignYaml({ maxRounds: 3, labelParams: { smearing: 0.01 } });
  const stop = { acc: { code: -1, text: '', events: [] as Record<string, any>[] }, rel: { code: -1, text: '', events: [] as Record<string, any>[] } };
  const again = { code: -1, text: '' };
  const accepted = { code: -1, out: new BufferOutput() };
  const relabeled = { code: -1, out: new BufferOutput() };

  beforeAll(async () => {
    for (const [c, s] of [
      [acc, stop.acc],
      [rel, stop.rel],
    ] as const) {
      await roundZero(c);
      writeFileSync(c.file, edited);
      const errors: string[] = [];
      const r = await runCampaign({ campaign: c.file, out: new BufferOutput(), error: (m) => errors.push(m) });
      s.code = r.exitCode;
      s.text = errors.join('\n');
      s.events = ledgerEvents(c.dir);
    }
    const errors: string[] = [];
    again.code = (await runCampaign({ campaign: acc.file, out: new BufferOutput(), error: (m) => errors.push(m) })).exitCode;
    again.text = errors.join('\n');
    accepted.code = (await runCampaign({ campaign: acc.file, out: accepted.out, acceptRevision: true, error: (m) => accepted.out.line(`error: ${m}`) })).exitCode;
    relabeled.code = (await runCampaign({ campaign: rel.file, out: relabeled.out, relabel: true, error: (m) => relabeled.out.line(`error: ${m}`) })).exitCode;
  }, 480_000);

  it('stops before planning anything, naming the change, round 0, its labels and the two choices', () => {
    for (const s of [stop.acc, stop.rel]) {
      expect(s.code).toBe(1);
      expect(s.text).toContain('stages.label.params.smearing: (absent) -> 0.01');
      expect(s.text).toContain('labels made under the earlier settings: r0');
      expect(s.text).toContain('rounds/r0/label/labeled.xyz');
      expect(s.text).toContain('rounds/r0/label/train.xyz and rounds/r0/label/test.xyz');
      expect(s.text).toContain('--accept-revision');
      expect(s.text).toContain('--relabel');
      const last = s.events.at(-1)!;
      expect(last).toMatchObject({ type: 'campaign_revision', number: 2, affects_data: ['stages.label.params.smearing'], decision_needed: true });
      expect(s.events.some((e) => e.type === 'stage_planned' && e.round === 1)).toBe(false);
    }
  });

  it('asks again while nobody has chosen, without recording the revision twice', () => {
    expect(again.code).toBe(1);
    expect(again.text).toContain('stages.label.params.smearing');
    const events = ledgerEvents(acc.dir);
    expect(events.filter((e) => e.type === 'campaign_revision')).toHaveLength(2);
  });

  it('--accept-revision records the choice and goes on to the end, keeping the earlier labels', () => {
    expect(accepted.code, accepted.out.text).toBe(0);
    const events = ledgerEvents(acc.dir);
    const d = events.filter((e) => e.type === 'revision_decided');
    expect(d).toHaveLength(1);
    expect(d[0]).toMatchObject({ choice: 'accept', by: userInfo().username, sha256: sha256sum(acc.file) });
    expect(events.some((e) => e.type === 'campaign_ended')).toBe(true);
    // The data sets of round 1 hold round 0's labels and round 1's (counted by ASE).
    const n = (f: string): number => aseFrames([join(acc.dir, f)]).length;
    expect(n('rounds/r1/label/train.xyz') + n('rounds/r1/label/test.xyz')).toBe(n('rounds/r0/label/labeled.xyz') + n('rounds/r1/label/labeled.xyz'));
  });

  it('--relabel labels round 0\'s frames again in round 1 and builds its data sets from round 1\'s labels only', () => {
    expect(relabeled.code, relabeled.out.text).toBe(0);
    const events = ledgerEvents(rel.dir);
    const d = events.filter((e) => e.type === 'revision_decided');
    expect(d).toHaveLength(1);
    expect(d[0]).toMatchObject({ choice: 'relabel', round: 1, rounds: [0], by: userInfo().username });
    expect(events.some((e) => e.type === 'campaign_ended')).toBe(true);
    const at = (f: string): string => join(rel.dir, f);
    const r0 = aseFrames([at('rounds/r0/label/labeled.xyz')]);
    const sampled = aseFrames([at('rounds/r1/sample/0000/frames.xyz')]);
    const chunkDir = at('rounds/r1/label');
    const chunks = aseFrames(
      readdirSync(chunkDir)
        .filter((n) => /^\d{4}$/.test(n))
        .sort()
        .map((n) => join(chunkDir, n, 'frames.xyz')),
    );
    // Round 1's label tasks were sent its own selected frames plus every frame of round 0's labeled.xyz ...
    expect(r0.length).toBeGreaterThan(0);
    expect(chunks.length).toBe(sampled.length + r0.length);
    // ... as structures without the old labels.
    expect(chunks.some((f) => f.energy)).toBe(false);
    const close = (a: number[][], b: number[][]): boolean => a.length === b.length && a.every((p, i) => p.every((x, k) => Math.abs(x - b[i][k]) < 1e-6));
    for (const f of r0) expect(chunks.some((g) => close(f.positions, g.positions))).toBe(true);
    // Round 1's data sets hold exactly the frames labeled in round 1.
    const labeled1 = aseFrames([at('rounds/r1/label/labeled.xyz')]);
    const sets1 = aseFrames([at('rounds/r1/label/train.xyz'), at('rounds/r1/label/test.xyz')]);
    expect(sets1.length).toBe(labeled1.length);
    for (const f of sets1) expect(labeled1.some((g) => close(f.positions, g.positions))).toBe(true);
    const check = JSON.parse(readFileSync(at('rounds/r1/label/check.json'), 'utf8'));
    expect(check.relabeled).toMatchObject({ frames: r0.length, rounds: [0], revision: 2 });
    const gated = events.find((e) => e.type === 'stage_gated' && e.round === 1 && e.stage === 'label');
    const note = `relabeled ${r0.length} frames of round r0 under revision 2; earlier labels dropped from the data sets`;
    expect(gated!.gates[0].reasons).toContain(note);
    expect(gated!.summary).toContain(note);
    expect(relabeled.out.text).toContain(note);
    const planned = events.find((e) => e.type === 'stage_planned' && e.round === 1 && e.stage === 'label');
    const r0Labeled = events.filter((e) => e.type === 'artifact' && e.path === 'rounds/r0/label/labeled.xyz').at(-1);
    expect(planned!.inputs).toContain(r0Labeled!.id);
  });

  it('status shows the choice, and ratchet revisions prints the differences', async () => {
    const s = (await campaignStatus(rel.file, () => undefined)).report!;
    expect(s.revisions!.at(-1)).toMatchObject({ number: 2, decision: { choice: 'relabel', round: 1 } });
    const text = new BufferOutput();
    expect(await revisionsCommand(rel.file, '1', undefined, { out: text, error: (m) => text.line(`error: ${m}`) })).toBe(0);
    expect(text.text).toMatch(/revision 1 \([0-9a-f]{12}\) -> revision 2 \([0-9a-f]{12}\): 1 difference\(s\)/);
    expect(text.text).toContain('  stages.label.params.smearing: (absent) -> 0.01');
    const list = new BufferOutput();
    expect(await revisionsCommand(rel.file, undefined, undefined, { out: list, error: (m) => list.line(`error: ${m}`) })).toBe(0);
    expect(list.text).toMatch(/ 2\s+[0-9a-f]{12}\s+r1\s+1\s+relabel by \S+ \(in r1\)/);
    const bad: string[] = [];
    expect(await revisionsCommand(rel.file, '7', undefined, { out: new BufferOutput(), error: (m) => bad.push(m) })).toBe(2);
    expect(bad.join('\n')).toContain('no revision 7: the campaign has revisions 1 to 2');
    // The command line, with --json and the second revision named by a sha256 prefix.
    const sha2 = sha256sum(rel.file);
    const json = JSON.parse(execFileSync(process.execPath, [...cliArgs(), 'revisions', rel.file, '1', sha2.slice(0, 8), '--json'], { cwd: REPO, encoding: 'utf8' }));
    expect(json.diff).toEqual({
      from: { number: 1, sha256: json.revisions[0].sha256 },
      to: { number: 2, sha256: sha2 },
      changes: [{ path: 'stages.label.params.smearing', new: 0.01 }],
    });
  }, 60_000);
});
